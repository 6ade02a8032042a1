"""Camera geometry: the camera model, its pose from the marker board, projection, row timing.

The stage between footage (:mod:`fitdrag.video`) and the fit (:mod:`fitdrag.fit`):

* :mod:`fitdrag.geometry.camera` - :class:`~fitdrag.geometry.camera.Camera` (pinhole camera
  with OpenCV's distortion model, pose, rolling-shutter readout): projection with its
  Jacobians, back-projected rays, row times, the exact image outline of a sphere;
* :mod:`fitdrag.geometry.pose` - the camera's pose from the marker board (PnP on all marker
  corners) with its covariance;
* :mod:`fitdrag.geometry.views` - :class:`~fitdrag.geometry.views.CameraView` (one camera's
  observations of one throw) and the closed-form centre and width of a sphere's image outline.
* :mod:`fitdrag.geometry.footage_view` - the camera that took tracked footage (lens, pose from
  its markers, readout) and its view, directly or through the track CSV's camera header;
* :mod:`fitdrag.geometry.sphere_image` - the exact image outline of a sphere (vectorised) and
  the supersampled coverage kernel;
* :mod:`fitdrag.geometry.render_views` - synthetic perspective footage of a flying sphere per
  camera (distortion, rolling shutter, motion blur, time offset, marker board);
* :mod:`fitdrag.geometry.view_truth` - its exact truth per frame and the files (MJPG, JSON).

World frame: the marker board plane is z = 0, x along the board, y up, z towards the camera.
Image: u to the right, v down (pixel centres at whole numbers, as in OpenCV).
Import from the defining modules.
"""
