"""Big batches take the sparse assembly and cofactor paths, small ones the dense
and LAPACK paths: the two must give the same figures (equivalent formulations)."""

import pathlib
import sys

import numpy as np

sys.path.insert(0, str(pathlib.Path(__file__).resolve().parent / "bench"))

from bench_engine import varied_values  # noqa: E402

from model.analyses.figures import analyse_batch  # noqa: E402
from model.circuit.assembly import SPARSE_FROM as _SPARSE_FROM  # noqa: E402

# The batch sizes where the paths switch over, imported so the test follows them.
from model.circuit.dense import _LAPACK_BELOW  # noqa: E402

CHUNK = 50


def test_one_big_batch_equals_many_small_ones():
    n = 600
    # The big batch takes the sparse and cofactor paths, each chunk the dense and LAPACK ones.
    assert n >= max(_SPARSE_FROM, _LAPACK_BELOW) and CHUNK < min(_SPARSE_FROM, _LAPACK_BELOW)
    values = varied_values(n, seed=7)
    values["stage.re1"][::5] = 0.0  # a second shape in the same batch
    values["load.rl"][::7] = np.inf  # and a third
    big = analyse_batch("common-emitter", values)
    chunks = [analyse_batch("common-emitter", {k: v[i : i + CHUNK] for k, v in values.items()})
              for i in range(0, n, CHUNK)]
    assert big.converged.all()
    for name in ("ic", "vce", "gm", "r_pi", "ro", "av_open", "av_loaded", "av_source", "rin", "rin_base", "rout"):
        small = np.concatenate([getattr(c, name) for c in chunks])
        # Both are exact solutions of the same equations; only rounding differs.
        np.testing.assert_allclose(getattr(big, name), small, rtol=1e-9, err_msg=name)
    assert list(big.region) == list(np.concatenate([c.region for c in chunks]))
