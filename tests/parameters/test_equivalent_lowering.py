"""Equivalent sets under rain that differs between subcatchments, where the solved parameter
alone cannot give the runoff: the next declared parameters are lowered in turn.

Each case is two subcatchments with a rain column each (areal rain): ``A`` asks for a runoff
the solved parameter alone cannot give, ``B`` is an ordinary case on rain of its own. The
checks are exact water balances of the loss methods (with no continuing loss, runoff is rain
minus initial loss minus depression storage: Chow, Maidment and Mays 1988, section 5.2, the
abstractions as losses; depression storage filled before runoff, common practice), a
brute-force scan of the one-parameter depth, and lumped re-runs built here from the table's
rows (not by the code that made them).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from gisrun.engine import run_losses
from gisrun.parameters.equivalent import LOWERED, StormRunoff, lumped_parameters
from gisrun.parameters.inverse import ABOVE_REACH, REPRODUCE_RTOL

DT = 300.0
MM = 1e-3
MM_H = 1e-3 / 3600.0
#: Two bursts with a dry spell between them, m per 5-minute step (an invented storm).
BURSTS = np.array([1, 3, 6, 4, 2, 0, 0, 0, 0, 2, 5, 3, 1, 0, 0], float) * MM
#: Subcatchment B's own rain: later and lighter.
LATER = np.array([0, 0, 1, 2, 4, 3, 2, 1, 0, 0, 0, 1, 2, 1, 0], float) * MM
AREAL = np.column_stack([BURSTS, LATER])  # (steps, subcatchments), columns A, B
COMMON = {"horton_decay_per_s": 4.14 / 3600, "horton_recovery_per_s": 0.3 / 3600}


def subcatchments(**columns: list[float]) -> pd.DataFrame:
    """A and B, each two pervious parts of 50 m2 (columns give A's two values, then B's)."""
    return pd.DataFrame({"subcatchment_id": ["A", "A", "B", "B"], "surface": "pervious",
                         "area_m2": 50.0, **columns})


def per_unit_runoff(frame: pd.DataFrame, method: str) -> np.ndarray:
    """gisrun's runoff of A and B: each part on its subcatchment's rain column."""
    rain = AREAL[:, (frame["subcatchment_id"] == "B").to_numpy(int)]
    depth = run_losses(frame, rain, DT, method=method, deduplicate=False).runoff_depth_m
    return np.array([depth[:2].mean(), depth[2:].mean()])


def equivalent_rows(frame: pd.DataFrame, method: str, targets: np.ndarray) -> pd.DataFrame:
    table = lumped_parameters(frame, ["A", "B"], [StormRunoff("areal", AREAL, targets)], DT,
                              default_method=method)
    return table[(table["basis"] == "equivalent") & (table["surface"] == "pervious")]


def rerun(rows: pd.DataFrame, method: str, column: int) -> float:
    """The pervious unit of one subcatchment's rows run on its rain column."""
    unit = pd.DataFrame([dict(zip(rows["parameter"], rows["value"], strict=True))])
    return float(run_losses(unit, AREAL[:, column], DT, method=method).runoff_depth_m[0])


def values_of(rows: pd.DataFrame, sub: str) -> dict[str, float]:
    one = rows[rows["subcatchment_id"] == sub]
    return dict(zip(one["parameter"], one["value"], strict=True))


CONSTANT_LOSS = subcatchments(initial_loss_m=[0.002, 0.030, 0.004, 0.012],
                              constant_loss_m_per_s=[1 * MM_H, 9 * MM_H, 2 * MM_H, 4 * MM_H],
                              depression_storage_m=[0.001, 0.001, 0.001, 0.002])
PHI = subcatchments(phi_index_m_per_s=[0.5 * MM_H, 3 * MM_H, 2 * MM_H, 4 * MM_H],
                    depression_storage_m=[0.0005, 0.040, 0.001, 0.002])


@pytest.mark.parametrize(("method", "frame", "a_target", "expected"), [
    # A's parts: initial loss 2 and 30 mm (16 mm lumped); at no continuing loss the lumped
    # unit gives 27 - 16 - 1 = 10 mm, yet gisrun's per-part runoff is more (the first part
    # runs off about 23 mm, the second none): the initial loss is lowered, IL = P - S - q
    ("constant_loss", CONSTANT_LOSS, None,
     lambda q: {"constant_loss_m_per_s": 0.0, "initial_loss_m": 26 * MM - q,
                "depression_storage_m": 1 * MM}),
    # 26.5 mm asked for: more than rain less depression storage (26 mm) at no loss at all, so
    # the storage is lowered too: S = P - IL - q = 27 - 0 - 26.5 = 0.5 mm
    ("constant_loss", CONSTANT_LOSS, 26.5 * MM,
     lambda q: {"constant_loss_m_per_s": 0.0, "initial_loss_m": 0.0,
                "depression_storage_m": 27 * MM - q}),
    # phi-index: A's storage of 0.5 and 40 mm lumps to 20.25 mm, so the lumped unit gives at
    # most 6.75 mm; gisrun's parts give about 26 and 0 mm: S = P - q (phi = 0)
    ("phi_index", PHI, None,
     lambda q: {"phi_index_m_per_s": 0.0, "depression_storage_m": 27 * MM - q}),
])
def test_lowering_in_turn_gives_the_water_balance_values(method, frame, a_target, expected):
    targets = per_unit_runoff(frame, method)
    if a_target is None:  # gisrun's own runoff: more than the lumped unit gives at rate 0
        assert targets[0] > BURSTS.sum() - lumped_holds(frame, method) + 1 * MM
    else:
        targets[0] = a_target
    rows = equivalent_rows(frame, method, targets)
    a, b = values_of(rows, "A"), values_of(rows, "B")
    for column, value in expected(targets[0]).items():
        assert a[column] == pytest.approx(value, abs=REPRODUCE_RTOL * targets[0] + 1e-12), column
    notes = dict(zip(rows["subcatchment_id"], rows["note"], strict=False))
    assert notes["A"] == LOWERED and notes["B"] == ""
    for k, sub in enumerate("AB"):  # the re-run on each subcatchment's own rain column
        got = rerun(rows[rows["subcatchment_id"] == sub], method, k)
        assert got == pytest.approx(targets[k], rel=REPRODUCE_RTOL)
    # B needed no lowering: only its solved rate differs from the area-weighted values
    assert b["depression_storage_m"] == pytest.approx(
        frame.loc[frame["subcatchment_id"] == "B", "depression_storage_m"].mean())


def lumped_holds(frame: pd.DataFrame, method: str) -> float:
    """What A's lumped unit holds back at no continuing loss: initial loss and storage."""
    a = frame[frame["subcatchment_id"] == "A"]
    held = a["depression_storage_m"].mean()
    return held + (a["initial_loss_m"].mean() if method == "constant_loss" else 0.0)


def test_runoff_above_the_rain_is_still_said():
    frame = CONSTANT_LOSS
    targets = per_unit_runoff(frame, "constant_loss")
    targets[0] = BURSTS.sum() + 1 * MM  # more runoff than rain: nothing can give it
    rows = equivalent_rows(frame, "constant_loss", targets)
    a = rows[rows["subcatchment_id"] == "A"]
    assert set(a["note"]) == {ABOVE_REACH}
    assert values_of(rows, "A")["depression_storage_m"] == 0.0  # the whole chain at its lowest
    assert rerun(a, "constant_loss", 0) == pytest.approx(BURSTS.sum())


# --- Horton: the runoff jumps with the initial capacity -----------------------------------------

HORTON = subcatchments(horton_f0_m_per_s=[60 * MM_H, 100 * MM_H, 50 * MM_H, 90 * MM_H],
                       horton_fc_m_per_s=[2 * MM_H, 8 * MM_H, 3 * MM_H, 6 * MM_H],
                       depression_storage_m=[0.005] * 4, **COMMON)


def horton_depth(f0: np.ndarray, storage: float = 0.005) -> np.ndarray:
    """Runoff of A's lumped pervious unit on A's rain with fc = 0, for each initial capacity."""
    units = pd.DataFrame({"horton_f0_m_per_s": f0, "horton_fc_m_per_s": 0.0,
                          "depression_storage_m": storage, **COMMON})
    return run_losses(units, BURSTS, DT, method="horton", deduplicate=False).runoff_depth_m


def test_a_jump_in_the_runoff_is_closed_by_the_next_parameter():
    """The capacity recovers only in steps without supply, so the step in which depression
    storage runs dry in the dry spell switches a whole step of recovery on or off: the
    runoff jumps with f0. A target inside a jump is reached by lowering the storage."""
    f0 = np.linspace(60.0, 80.0, 20001) * MM_H  # 0.001 mm/h apart
    depth = horton_depth(f0)
    jump = int(np.argmax(np.abs(np.diff(depth))))
    assert depth[jump] - depth[jump + 1] > 0.2 * MM  # a jump of more than 0.2 mm
    target = (depth[jump] + depth[jump + 1]) / 2
    assert np.min(np.abs(depth - target)) > 0.1 * MM  # no f0 alone gives it
    assert horton_depth(np.array([80 * MM_H]))[0] < target  # nor fc alone, at A's mean f0
    targets = per_unit_runoff(HORTON, "horton")
    targets[0] = target
    rows = equivalent_rows(HORTON, "horton", targets)
    a = values_of(rows, "A")
    assert rows.loc[rows["subcatchment_id"] == "A", "note"].iloc[0] == LOWERED
    assert a["horton_fc_m_per_s"] == 0.0
    for k, sub in enumerate("AB"):  # the note says reproduced: the re-run must say so too
        got = rerun(rows[rows["subcatchment_id"] == sub], "horton", k)
        assert got == pytest.approx(targets[k], rel=REPRODUCE_RTOL)
    assert f0[jump] <= a["horton_f0_m_per_s"] <= f0[jump + 1]  # held at the jump
    assert a["depression_storage_m"] < 0.005  # and the storage lowered
