"""Cell-centred finite-volume demo solvers on 2-D quadrilateral meshes."""
