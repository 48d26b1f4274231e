"""A small external "program" for the tests: reads its case file, writes its result as VTU (meshio).

It samples the manufactured field of plate-poisson with an error of size
h**2 (a second-order scheme's), on quadrilateral cells (``cell`` mode, cell
data at centroids) or at the nodes (``point`` mode). ``first`` makes the
error of size h, a first-order scheme.
"""

import sys
import tomllib

import meshio
import numpy as np


def field(x, y, h, power):
    a, b = 0.7, 1.3
    exact = np.sin(a * np.pi * x + 0.2) * np.cos(b * np.pi * y) + np.exp(0.5 * x * y)
    return exact + h**power * np.sin(3 * x) * np.cos(2 * y)


def main():
    case = tomllib.loads(open(sys.argv[1]).read())
    mode = sys.argv[2]
    (nx, ny), (x0, y0), (x1, y1) = case["cells"], case["lower"], case["upper"]
    xs, ys = np.linspace(x0, x1, nx + 1), np.linspace(y0, y1, ny + 1)
    X, Y = np.meshgrid(xs, ys, indexing="ij")
    points = np.column_stack([X.ravel(), Y.ravel()])
    idx = np.arange((nx + 1) * (ny + 1)).reshape(nx + 1, ny + 1)
    quads = np.column_stack([idx[:-1, :-1].ravel(), idx[1:, :-1].ravel(), idx[1:, 1:].ravel(), idx[:-1, 1:].ravel()])
    h = case["h"]
    power = 1 if "first" in sys.argv[3:] else 2
    if mode == "cell":
        c = points[quads].mean(axis=1)
        mesh = meshio.Mesh(points, [("quad", quads)], cell_data={"u": [field(c[:, 0], c[:, 1], h, power)]})
    else:
        mesh = meshio.Mesh(points, [("quad", quads)], point_data={"u": field(points[:, 0], points[:, 1], h, power)})
    mesh.write(case["output"])


if __name__ == "__main__":
    main()
