"""Published values the tests check against, each with its source.

Source of every value here: H. Topaloglu (2009), "Using Lagrangian relaxation to compute
capacity-dependent bid prices in network revenue management", Operations Research 57(3):637-649.
Table 1: DLP and LR upper bounds; Table 2: simulated revenues of the DLP and LR bid-price policies
(bid prices recomputed at 5 equally spaced periods, 100 demand trajectories). Rounded to whole
currency units as published.
"""

from __future__ import annotations

# Topaloglu (2009), Table 1: DLP bound for every 200-period instance.
DLP_BOUND = {
    "rm_200_4_1.0_4.0": 21531,
    "rm_200_4_1.0_8.0": 34571,
    "rm_200_4_1.2_4.0": 19882,
    "rm_200_4_1.2_8.0": 32922,
    "rm_200_4_1.6_4.0": 17530,
    "rm_200_4_1.6_8.0": 30570,
    "rm_200_5_1.0_4.0": 22144,
    "rm_200_5_1.0_8.0": 35387,
    "rm_200_5_1.2_4.0": 21263,
    "rm_200_5_1.2_8.0": 34495,
    "rm_200_5_1.6_4.0": 18870,
    "rm_200_5_1.6_8.0": 32081,
    "rm_200_6_1.0_4.0": 22300,
    "rm_200_6_1.0_8.0": 35544,
    "rm_200_6_1.2_4.0": 20932,
    "rm_200_6_1.2_8.0": 34172,
    "rm_200_6_1.6_4.0": 18592,
    "rm_200_6_1.6_8.0": 31824,
    "rm_200_8_1.0_4.0": 20052,
    "rm_200_8_1.0_8.0": 31835,
    "rm_200_8_1.2_4.0": 18952,
    "rm_200_8_1.2_8.0": 30727,
    "rm_200_8_1.6_4.0": 16833,
    "rm_200_8_1.6_8.0": 28608,
}

# Topaloglu (2009), Table 1: Lagrangian-relaxation bound, 4-spoke 200-period instances.
LR_BOUND = {
    "rm_200_4_1.0_4.0": 20439,
    "rm_200_4_1.0_8.0": 33305,
    "rm_200_4_1.2_4.0": 18938,
    "rm_200_4_1.2_8.0": 31737,
    "rm_200_4_1.6_4.0": 16600,
    "rm_200_4_1.6_8.0": 29413,
}

# Topaloglu (2009), Table 2: simulated policy revenues (5 re-solves, 100 trajectories).
POLICY_REVENUE = {
    "rm_200_4_1.0_4.0": {"dlp": 19367, "lr": 20018},
    "rm_200_4_1.0_8.0": {"dlp": 30713, "lr": 32626},
    "rm_200_4_1.2_4.0": {"dlp": 17082, "lr": 18374},
    "rm_200_4_1.2_8.0": {"dlp": 27238, "lr": 30852},
    "rm_200_4_1.6_4.0": {"dlp": 14251, "lr": 15981},
    "rm_200_4_1.6_8.0": {"dlp": 23573, "lr": 28381},
}
