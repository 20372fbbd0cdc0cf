"""Build step for the compiled kernels (the banded interior-point iterations, the envelope's
passes, the QP rows' elimination and scaling, the alignment's optimal partitioning, the
smoothing scales' banded factorisations and solves, their design matrices' products and their
noise replicates' curvature and the chosen scale's ramp, and the CSV writers' rows);
everything else about the package is declared in pyproject.toml.

The kernels use only the Python C API (its buffer protocol; the CSV rows its str functions too),
so a C compiler is all they need. They are optional: where they cannot be built the package
still installs; the banded QP backend then hands every QP to Clarabel (and says so in the
profile's notes), the envelope runs its Python loops and the CSV writers join rows by `%`.
"""

from setuptools import Extension, setup


#: Headers the kernels share (``depends``: a change rebuilds the kernels that include them;
#: MANIFEST.in puts them in the source distribution).
HEADERS = {"solvers": ["src/curvespeed/solvers/_accel_bounds.h",
                       "src/curvespeed/solvers/_window_rows.h"]}


def kernel(name: str, package: str = "solvers") -> Extension:
    return Extension(f"curvespeed.{package}.{name}", [f"src/curvespeed/{package}/{name}.c"],
                     depends=HEADERS.get(package, []),
                     extra_compile_args=["-O3", "-std=c99", "-ffp-contract=off"],
                     optional=True)


# -ffp-contract=off and no -ffast-math: the envelope's passes stay the Python loops' twin to the
# last bit (no fused multiply-adds, no reordering)
setup(ext_modules=[kernel("_banded_ipm"), kernel("_envelope_passes"), kernel("_qp_rows"),
                   kernel("_window_qp"), kernel("_ipm_frame"),
                   kernel("_window_check"),
                   kernel("_partition", "geometry"), kernel("_band_solve", "geometry"),
                   kernel("_replicate_curvature", "geometry"),
                   kernel("_basis_rows", "geometry"), kernel("_scale_ramp", "geometry"),
                   kernel("_csv_rows", "io")])
