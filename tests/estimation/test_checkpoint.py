"""Checkpoint files and resuming an interrupted sampler run.

Reference: an uninterrupted run with the same seed (the ensemble move draws all
its random numbers from one generator whose state is saved with the chain, so
a resumed run must reproduce it bit for bit).
"""

import os
import signal
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import numpy as np
import pytest

from speciakin.chemistry.model import Prior
from speciakin.errors import InputError
from speciakin.estimation.checkpoint import Checkpoint, read_checkpoint, write_checkpoint
from speciakin.estimation.sampling import sample_posterior

PRIORS = [Prior("normal", {"mean": 0.0, "sd": 3.0}), Prior("halfnormal", {"scale": 2.0})]
NAMES = ["shift", "noise"]


def banana_log_likelihood(theta):
    """A mildly curved 2-D target (invented test function)."""
    a, b = theta[:, 0], theta[:, 1]
    return -0.5 * ((a - 0.4) / 0.5) ** 2 - 0.5 * ((b - 0.8 - 0.3 * a ** 2) / 0.2) ** 2


class InterruptAfter:
    """Likelihood that raises KeyboardInterrupt on its n-th call (simulated Ctrl-C)."""

    def __init__(self, n_calls):
        self.n_calls = n_calls
        self.calls = 0

    def __call__(self, theta):
        self.calls += 1
        if self.calls == self.n_calls:
            raise KeyboardInterrupt
        return banana_log_likelihood(theta)


def run(function, n_steps, path=None, resume=False, **kwargs):
    return sample_posterior(function, NAMES, PRIORS, [0.4, 0.85], [0.2, 0.1], n_walkers=8, n_steps=n_steps,
                            seed=123, checkpoint=path, resume=resume, progress=False, **kwargs)


def test_write_read_round_trip_and_no_temp_left(tmp_path):
    rs = np.random.RandomState(5).get_state()
    cp = Checkpoint(np.arange(24.0).reshape(3, 4, 2), np.zeros((3, 4)), np.array([1.0, 2, 3, 0]), rs,
                    {"seed": 5, "parameter_names": ["a", "b"]})
    path = tmp_path / "run.ckpt.h5"
    write_checkpoint(path, cp)
    write_checkpoint(path, cp)  # overwrite in place
    back = read_checkpoint(path)
    assert np.array_equal(back.chain, cp.chain) and back.iteration == 3
    assert back.settings == cp.settings
    restored = np.random.RandomState()
    restored.set_state(back.random_state)
    original = np.random.RandomState()
    original.set_state(rs)
    assert np.array_equal(restored.random_sample(5), original.random_sample(5))
    assert sorted(p.name for p in tmp_path.iterdir()) == ["run.ckpt.h5"]


def test_read_rejects_missing_and_foreign_files(tmp_path):
    with pytest.raises(InputError, match="checkpoint file not found"):
        read_checkpoint(tmp_path / "none.h5")
    junk = tmp_path / "junk.h5"
    junk.write_text("hello")
    with pytest.raises(InputError, match="cannot be read"):
        read_checkpoint(junk)


def test_resume_after_keyboard_interrupt_equals_uninterrupted_run(tmp_path):
    reference = run(banana_log_likelihood, 120)
    path = tmp_path / "ck.h5"
    with pytest.raises(KeyboardInterrupt):
        # 1 call for the start, then 2 calls per step: interrupted inside step 71
        run(InterruptAfter(142), 120, path, checkpoint_every=1e9, checkpoint_every_steps=25)
    saved = read_checkpoint(path)
    # the checkpoint written on interrupt holds every completed step
    assert saved.iteration == 70
    resumed = run(banana_log_likelihood, 120, path, resume=True)
    assert resumed.resumed_from == 70
    assert resumed.chain.shape == (120, 8, 2)
    assert np.array_equal(resumed.chain[:70], saved.chain)
    assert np.array_equal(resumed.chain, reference.chain)
    assert np.array_equal(resumed.log_prob, reference.log_prob)
    assert np.array_equal(resumed.acceptance_fraction, reference.acceptance_fraction)


def test_resume_can_extend_a_finished_run(tmp_path):
    path = tmp_path / "ck.h5"
    first = run(banana_log_likelihood, 40, path)
    again = run(banana_log_likelihood, 40, path, resume=True)
    assert np.array_equal(first.chain, again.chain) and again.n_likelihood_evaluations == 0
    longer = run(banana_log_likelihood, 90, path, resume=True)
    assert np.array_equal(longer.chain, run(banana_log_likelihood, 90).chain)


def test_resume_refuses_another_run(tmp_path):
    path = tmp_path / "ck.h5"
    run(banana_log_likelihood, 10, path)
    with pytest.raises(InputError, match="different run: 'seed' differs"):
        sample_posterior(banana_log_likelihood, NAMES, PRIORS, [0.4, 0.85], [0.2, 0.1], n_walkers=8, n_steps=20,
                         seed=7, checkpoint=path, resume=True, progress=False)


def test_resume_without_file_starts_fresh(tmp_path):
    result = run(banana_log_likelihood, 10, tmp_path / "new.h5", resume=True)
    assert result.resumed_from is None and any("no checkpoint" in w for w in result.warnings)


_CHILD = textwrap.dedent("""
    import sys, time
    import numpy as np
    sys.path.insert(0, {test_dir!r})
    from test_checkpoint import run, banana_log_likelihood

    def slow(theta):
        time.sleep(0.001)
        return banana_log_likelihood(theta)

    run(slow, 100000, {path!r}, checkpoint_every=1e9, checkpoint_every_steps=10)
""")


@pytest.mark.parametrize("kill_signal", [signal.SIGKILL, pytest.param(signal.SIGTERM, marks=pytest.mark.slow)])
def test_resume_after_killed_process(tmp_path, kill_signal):
    path = tmp_path / "ck.h5"
    code = _CHILD.format(test_dir=str(Path(__file__).parent), path=str(path))
    env = dict(os.environ, PYTHONPATH=os.pathsep.join(sys.path))
    child = subprocess.Popen([sys.executable, "-c", code], env=env, stderr=subprocess.PIPE)
    try:
        deadline = time.monotonic() + 60
        while time.monotonic() < deadline and child.poll() is None:
            if path.exists():
                try:
                    if read_checkpoint(path).iteration >= 20:
                        break
                except InputError:
                    pass  # the file is replaced atomically; a read during rename may race on some systems
            time.sleep(0.05)
        assert child.poll() is None, child.stderr.read().decode()
        child.send_signal(kill_signal)
        child.wait(timeout=20)
    finally:
        if child.poll() is None:
            child.kill()
            child.wait()
    saved = read_checkpoint(path)
    assert saved.iteration >= 20
    n_total = saved.iteration + 15
    resumed = run(banana_log_likelihood, n_total, path, resume=True)
    assert resumed.chain.shape[0] == n_total
    assert np.array_equal(resumed.chain[:saved.iteration], saved.chain)
    assert np.array_equal(resumed.chain, run(banana_log_likelihood, n_total).chain)


def test_interrupt_before_first_step_then_resume(tmp_path):
    path = tmp_path / "ck.h5"
    with pytest.raises(KeyboardInterrupt):
        run(InterruptAfter(1), 30, path)  # the start evaluation is interrupted
    assert not path.exists()
    resumed = run(banana_log_likelihood, 30, path, resume=True)
    assert np.array_equal(resumed.chain, run(banana_log_likelihood, 30).chain)


def test_unseeded_run_resumes_with_its_own_seed(tmp_path):
    path = tmp_path / "ck.h5"
    kwargs = dict(n_walkers=8, checkpoint=path, progress=False)
    with pytest.raises(KeyboardInterrupt):
        sample_posterior(InterruptAfter(40), NAMES, PRIORS, [0.4, 0.85], [0.2, 0.1], n_steps=50,
                         checkpoint_every_steps=5, **kwargs)
    seed = read_checkpoint(path).settings["seed"]
    resumed = sample_posterior(banana_log_likelihood, NAMES, PRIORS, [0.4, 0.85], [0.2, 0.1], n_steps=50,
                               resume=True, **kwargs)
    assert resumed.seed == seed
    fresh = sample_posterior(banana_log_likelihood, NAMES, PRIORS, [0.4, 0.85], [0.2, 0.1], n_steps=50,
                             n_walkers=8, seed=seed, progress=False)
    assert np.array_equal(resumed.chain, fresh.chain)
