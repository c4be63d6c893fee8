"""Shared helpers for the engine tests: unit parameter frames in SI."""

from __future__ import annotations

import numpy as np
import pandas as pd

CM_PER_H = 1e-2 / 3600.0  # m/s
MM_PER_H = 1e-3 / 3600.0  # m/s
INCH = 0.0254  # m, exact by definition

#: Silt loam, Rawls, Brakensiek and Miller (1983) as tabulated in Chow, Maidment
#: and Mays (1988) Table 4.3.1 (from memory): effective porosity 0.486,
#: wetting-front suction head 16.7 cm, hydraulic conductivity 0.65 cm/h.
SILT_LOAM = {"effective_porosity": 0.486, "suction_head_m": 0.167, "ks_m_per_s": 0.65 * CM_PER_H}

DEFAULTS = {
    "ks_m_per_s": 5.0 * MM_PER_H,
    "suction_head_m": 0.1,
    "moisture_deficit": 0.3,
    "depression_storage_m": 0.0,
    "horton_f0_m_per_s": 75.0 * MM_PER_H,
    "horton_fc_m_per_s": 5.0 * MM_PER_H,
    "horton_decay_per_s": 4.0 / 3600.0,
    "horton_recovery_per_s": 0.0,
    "curve_number": 80.0,
    "initial_abstraction_ratio": 0.2,
    "antecedent_condition": 2,
    "initial_loss_m": 0.01,
    "constant_loss_m_per_s": 2.0 * MM_PER_H,
    "phi_index_m_per_s": 2.0 * MM_PER_H,
}


def unit_frame(n: int = 1, **columns: object) -> pd.DataFrame:
    """Unit parameter frame of ``n`` rows: defaults for every method, overridden by ``columns``."""
    data = {k: np.broadcast_to(np.asarray(v), (n,)).copy() for k, v in DEFAULTS.items()}
    for k, v in columns.items():
        data[k] = np.broadcast_to(np.asarray(v), (n,)).copy()
    return pd.DataFrame(data)
