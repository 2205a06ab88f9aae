"""Determinism and resume: same seed → same design; a run killed between checkpoints and resumed ends
exactly where an uninterrupted run ends (the requirement is 1e-9; we check it and bit equality).

The kill is imitated in-process: ``run(..., stop_after=k)`` returns after step k without writing a
final checkpoint, exactly what SIGKILL leaves behind (the last periodic checkpoint and nothing later).
"""

import os
import signal

import numpy as np
import pytest
from test_optimize import make_setup

from invdesign import SpecError, _checkpoint
from invdesign import _optimize as opt


@pytest.fixture(scope="module", params=["adam", "lbfgs"])
def setup(request):
    return make_setup(steps=8, optimizer=request.param)


@pytest.fixture(scope="module")
def reference(setup, tmp_path_factory):
    return opt.run(setup, tmp_path_factory.mktemp("ref"), quiet=True)


def test_same_seed_same_result(setup, reference, tmp_path):
    again = opt.run(setup, tmp_path, quiet=True)
    np.testing.assert_array_equal(again["best_u"], reference["best_u"])
    np.testing.assert_array_equal(again["history"], reference["history"])
    other = make_setup(steps=8, seed=1, optimizer=setup.opts.optimizer)
    assert not np.array_equal(opt.initial_starts(other), opt.initial_starts(setup))
    np.testing.assert_array_equal(opt.initial_starts(other)[0], opt.initial_starts(setup)[0])  # cell start


def test_killed_and_resumed_run_ends_at_the_same_design(setup, reference, tmp_path):
    # kill after step 7 (or just before the reference's early stop; L-BFGS meets this spec in 5 steps);
    # checkpoints every 3 steps, so the last one is at 6 (or 3) and the steps after it are lost
    at = min(7, reference["steps"] - 1)
    assert at >= 4, "the reference stopped too early to leave a checkpoint and lost steps after it"
    cut = opt.run(setup, tmp_path, quiet=True, stop_after=at)
    assert cut == {"interrupted_at": at}
    _, header = _checkpoint.load(tmp_path, setup.fingerprint)
    assert header["step"] == 3 * (at // 3)
    resumed = opt.run(setup, tmp_path, quiet=True)
    assert resumed["steps"] == reference["steps"]
    np.testing.assert_allclose(resumed["best_u"], reference["best_u"], rtol=0, atol=1e-9)
    np.testing.assert_array_equal(resumed["best_u"], reference["best_u"])
    np.testing.assert_array_equal(resumed["history"], reference["history"])
    k = int(np.argmin(reference["best_loss"]))
    a = setup.family.params(reference["best_u"][k])
    b = setup.family.params(resumed["best_u"][k])
    for x, y in zip(np.concatenate([np.ravel(v) for v in _leaves(a)]),
                    np.concatenate([np.ravel(v) for v in _leaves(b)]), strict=True):
        assert abs(float(x) - float(y)) <= 1e-9
    # a finished run resumed again does no more steps
    again = opt.run(setup, tmp_path, quiet=True)
    assert again["steps"] == reference["steps"]


def _leaves(params):
    import jax

    return [np.asarray(v) for v in jax.tree_util.tree_leaves(params)]


def test_checkpoint_refuses_other_settings(setup, tmp_path):
    _checkpoint.save(tmp_path, {"u": np.zeros(3)}, {"fingerprint": "other", "step": 1, "stopped": ""})
    with pytest.raises(SpecError, match="different settings"):
        opt.run(setup, tmp_path, quiet=True)


def test_checkpoint_write_is_atomic_and_round_trips(tmp_path):
    arrays = {"u": np.arange(6.0).reshape(2, 3), "count": np.array(3, dtype=np.int32)}
    _checkpoint.save(tmp_path, arrays, {"fingerprint": "x", "step": 4, "stopped": ""})
    got, header = _checkpoint.load(tmp_path, "x")
    assert header["step"] == 4 and got["count"].dtype == np.int32
    np.testing.assert_array_equal(got["u"], arrays["u"])
    leftovers = [p.name for p in (tmp_path / "checkpoints").iterdir() if p.name != "latest.npz"]
    assert leftovers == []


def test_sigterm_sets_the_stop_flag():
    with _checkpoint.StopFlag() as flag:
        os.kill(os.getpid(), signal.SIGTERM)
        assert flag.requested == "SIGTERM"
    assert signal.getsignal(signal.SIGTERM) is not flag._handler
