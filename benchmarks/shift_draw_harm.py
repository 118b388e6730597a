"""The per-draw variant of the evidence gate, measured (not the default; docs/evidence/prior_shift_log.md,
"One draw's harm when nothing moved").

The default rule bounds the *expected* harm under no shift (``max_harm``). This script swaps
in a cutoff that also holds a no-shift draw at the statistic's ``--level`` quantile to at most
``--draw-harm`` relative log loss, first- and second-order terms
(:func:`probwrap.shift._shift_tests.draw_cutoff`), and runs another benchmark script with it:

    PYTHONPATH=$PWD nice python benchmarks/shift_draw_harm.py [--draw-harm 0.02] [--level 0.95] \
        -- benchmarks/shift.py --quick --only=evidence
    PYTHONPATH=$PWD nice python benchmarks/shift_draw_harm.py -- benchmarks/shift_real_hunt22.py --seeds 2

Since session 23 the default gate also caps the share where p >= 0.10 (``draw_capped_weight``),
so this runs both; ``benchmarks/shift_draw_caps.py`` compares the rules on the same draws.
"""

from __future__ import annotations

import argparse
import runpy
import sys

import probwrap._prior_shift as prior_shift
from probwrap.shift._shift_tests import draw_cutoff


def main() -> None:
    """Patch the wrapper's gate, then run the named script with its own arguments."""
    ap = argparse.ArgumentParser()
    ap.add_argument("--draw-harm", type=float, default=0.02)
    ap.add_argument("--level", type=float, default=0.95)
    ap.add_argument("script", nargs=argparse.REMAINDER)
    a = ap.parse_args()
    script = [s for s in a.script if s != "--"]
    default_gate = prior_shift.evidence_gate

    def gate(result, n_classes, max_harm=0.01, min_evidence=1.0):
        _, cutoff = default_gate(result, n_classes, max_harm, min_evidence)
        if max_harm is not None:
            cutoff = draw_cutoff(result.null_harm_scale, getattr(result, "null_move_ratio", None),
                                 n_classes - 1, a.draw_harm, cutoff, a.level)
        return default_gate(result, n_classes, max_harm, cutoff)

    prior_shift.evidence_gate = gate
    sys.argv = script
    runpy.run_path(script[0], run_name="__main__")


if __name__ == "__main__":
    main()
