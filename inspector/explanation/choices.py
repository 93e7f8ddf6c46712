"""The explanation options and their defaults, importable without torch.

The command line builds its ``--help`` (choices, defaults, captions) from these names
without loading torch or transformers; the modules that compute re-export them.
"""

from __future__ import annotations

BASELINES: tuple[str, ...] = ("pad", "zero")
"""Integrated Gradients baselines (see :func:`inspector.explanation.gradients.baseline_embeddings`)."""
RULES: tuple[str, ...] = ("clenshaw-curtis", "gauss-legendre", "trapezoid")
"""Integration rules (see :func:`inspector.explanation.gradients.quadrature`)."""
DEFAULT_RULE = "clenshaw-curtis"
"""Its nodes are kept when the steps double, so the adaptive choice pays only for new nodes."""
NESTED_RULES = frozenset({"clenshaw-curtis", "trapezoid"})
"""Rules whose nodes for 2N intervals include those for N."""
RULE_NAMES = {
    "clenshaw-curtis": "Clenshaw-Curtis quadrature",
    "gauss-legendre": "Gauss-Legendre quadrature",
    "trapezoid": "trapezoid rule",
}
OCCLUSION_MODES: tuple[str, ...] = ("remove", "mask")
"""Leave each word out, or replace its pieces by the mask token."""

IG_START_STEPS = 8
"""Adaptive Integrated Gradients starts with this many quadrature nodes (intervals for a nested rule) ..."""
IG_MAX_STEPS = 512
"""... doubles them while the completeness error is too large, and stops here at the latest."""
IG_TOLERANCE = 0.01
"""Largest completeness error accepted, as a fraction of the logit difference F(x) - F(x')."""
IG_SMALL_DIFFERENCE = 0.1
"""Logit differences below this are held to ``IG_TOLERANCE * IG_SMALL_DIFFERENCE`` in absolute terms
(a relative error of a near-zero difference says nothing about the attributions)."""

CAUTION = (
    "Attention weights alone are not a faithful explanation of a prediction "
    "(Jain & Wallace 2019; Wiegreffe & Pinter 2019): check them against occlusion "
    "and Integrated Gradients before acting on them."
)
