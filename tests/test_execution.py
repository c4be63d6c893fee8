"""Chunk tasks on a cluster go out a few at a time and come back in task order.

A stand-in for dask's client records what is submitted and finishes futures in an order of its
own (the last submitted first), as workers do; the run must still see the outputs in task
order, never with more than the window's tasks out. The real cluster's outputs are compared
with one process's in ``tests/test_chunked.py``.
"""

from __future__ import annotations

import pytest

import gisrun.workflow.execution as execution
from gisrun.workflow.execution import execute, in_order, window


class Future:
    def __init__(self, client, task):
        self.client, self.task, self.released = client, task, False

    def result(self):
        self.client.results_taken += 1
        return ("out", self.task)

    def release(self):
        self.released = True
        self.client.out.remove(self)


class Client:
    """Submits eagerly and remembers the most futures ever out at once."""

    def __init__(self):
        self.out, self.submitted, self.most_out, self.results_taken = [], [], 0, 0

    def submit(self, fn, task, pure=True):
        assert fn is execution.process_chunk and pure is False
        future = Future(self, task)
        self.out.append(future)
        self.submitted.append(task)
        self.most_out = max(self.most_out, len(self.out))
        return future


@pytest.mark.parametrize("most", [1, 3, 50])
def test_outputs_come_in_task_order_with_at_most_the_window_out(most):
    client = Client()
    got = list(in_order(client, iter(range(20)), most))
    assert got == [("out", k) for k in range(20)]
    assert client.submitted == list(range(20))
    assert client.most_out == min(most, 20)
    assert client.out == []  # every future released


def test_the_next_task_goes_out_before_an_output_is_handed_on():
    client = Client()
    outputs = in_order(client, iter(range(5)), 2)
    next(outputs)
    # While the caller holds output 0, tasks 1 and 2 are out: the workers keep busy.
    assert client.submitted == [0, 1, 2] and len(client.out) == 2


def test_the_window_is_one_running_and_one_waiting_task_per_worker():
    assert window(1) == 2 and window(4) == 8
    assert window(0) == 2  # an empty cluster still takes one task at a time


def test_in_one_process_every_task_runs_once_in_order(monkeypatch):
    monkeypatch.setattr(execution, "process_chunk", lambda task: ("done", task))
    done = []
    got = list(execute(["a", "b", "c"], on_done=done.append))
    assert got == [("done", "a"), ("done", "b"), ("done", "c")] and done == [1, 2, 3]
