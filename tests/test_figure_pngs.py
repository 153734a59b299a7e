"""Figures drawn in two processes give the bytes drawn one by one (data_io.figure_pngs)."""

import os
import threading

import numpy as np
import pytest
from matplotlib.figure import Figure

from heatsight.data_io import figure_pngs as fp
from heatsight.data_io.plots import figure_png


def _figures(n=5):
    out = {}
    for i in range(n):
        fig = Figure(figsize=(3, 2))
        ax = fig.add_subplot()
        x = np.linspace(0, 1, 50)
        ax.plot(x, np.sin((i + 1) * x))
        ax.set_title(f"figure {i}")
        out[f"f{i}"] = fig
    return out


def test_same_bytes_and_order_as_one_by_one(monkeypatch):
    forks, real = [], os.fork

    def counted():
        forks.append(1)
        return real()
    monkeypatch.setattr(os, "fork", counted)
    figs = _figures()
    want = {n: figure_png(f) for n, f in figs.items()}
    got = fp.figure_pngs(figs)
    assert list(got) == list(want) and got == want
    assert len(forks) == (1 if fp._can_fork() else 0)


def test_no_fork_while_other_threads_run(monkeypatch):
    def no_fork():
        raise AssertionError("forked with another thread running")
    monkeypatch.setattr(os, "fork", no_fork)
    stop = threading.Event()
    other = threading.Thread(target=stop.wait)
    other.start()
    try:
        figs = _figures(3)
        assert fp.figure_pngs(figs) == {n: figure_png(f) for n, f in figs.items()}
    finally:
        stop.set()
        other.join()


def test_a_failing_child_leaves_the_drawing_to_this_process(monkeypatch):
    parent = os.getpid()
    real = fp.figure_png

    def png(fig, dpi):
        if os.getpid() != parent:
            raise RuntimeError("the child fails")
        return real(fig, dpi)
    monkeypatch.setattr(fp, "figure_png", png)
    figs = _figures(4)
    assert fp.figure_pngs(figs) == {n: figure_png(f) for n, f in figs.items()}


def test_a_failure_here_leaves_no_child_and_no_open_pipe(monkeypatch):
    if not fp._can_fork():       # asked when it runs: an earlier test may have left a thread behind
        pytest.skip("forks on Linux, with no other thread running, only")
    parent = os.getpid()
    real = fp.figure_png

    def png(fig, dpi):
        if os.getpid() == parent:
            raise RuntimeError("this process fails")
        return real(fig, dpi)
    monkeypatch.setattr(fp, "figure_png", png)
    children, fork = [], os.fork

    def recorded():
        pid = fork()
        if pid:
            children.append(pid)
        return pid
    monkeypatch.setattr(os, "fork", recorded)
    before = len(os.listdir("/proc/self/fd"))
    with pytest.raises(RuntimeError, match="this process fails"):
        fp.figure_pngs(_figures(4))
    assert len(os.listdir("/proc/self/fd")) == before and len(children) == 1
    with pytest.raises(ChildProcessError):          # the child was reaped
        os.waitpid(children[0], os.WNOHANG)
