"""Explain-one-misfire arithmetic without a transformer: rollout rule, quadrature, IG, ranks, occlusion rows."""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.integrate
import scipy.stats
import torch
from hypothesis import given, settings
from hypothesis import strategies as st

from inspector.errors import HeadcountError
from inspector.explanation.faithfulness import (
    AGREEMENT_THRESHOLD,
    average_ranks,
    faithfulness,
    faithfulness_hints,
    merge_to_words,
    spearman,
)
from inspector.explanation.gradients import (
    grad_weighted_rollout,
    integrate_adaptively,
    integrate_path,
    quadrature,
)
from inspector.explanation.occlusion import occluded_rows
from inspector.explanation.rewording import heads_that_changed, word_changes


def test_grad_weighted_rollout_hand_computed():
    """Reference: Chefer, Gur & Wolf 2021, eq. (5)-(6): Abar = mean_h((grad ⊙ A)^+), R = I, R <- R + Abar R.

    Worked by hand (2 layers, 2 heads, 3 tokens):
    Layer 1
      head 0: A = [[.5,.5,0],[0,1,0],[0,0,1]], G = [[2,-2,0],[0,1,0],[0,0,0]]
              G⊙A = [[1,-1,0],[0,1,0],[0,0,0]]  -> positive part [[1,0,0],[0,1,0],[0,0,0]]
      head 1: A = [[0,.5,.5],[.5,.5,0],[0,0,1]], G = [[4,2,-4],[0,0,0],[0,0,2]]
              G⊙A = [[0,1,-2],[0,0,0],[0,0,2]]  -> positive part [[0,1,0],[0,0,0],[0,0,2]]
      Abar1 = mean = [[.5,.5,0],[0,.5,0],[0,0,1]]
      R1 = I + Abar1 I = [[1.5,.5,0],[0,1.5,0],[0,0,2]]
    Layer 2
      head 0: A = [[0,0,1],[0,1,0],[0,1,0]], G = [[0,0,1],[0,0,0],[0,0,0]] -> (G⊙A)^+ = [[0,0,1],0,0]
      head 1: A = [[.5,0,.5],[0,1,0],[0,0,1]], G = [[2,0,-1],[0,0,0],[0,0,0]]
              G⊙A = [[1,0,-.5],0,0] -> positive part [[1,0,0],0,0]
      Abar2 = [[.5,0,.5],[0,0,0],[0,0,0]]
      Abar2 R1: row 0 = .5*[1.5,.5,0] + .5*[0,0,2] = [.75,.25,1], rows 1-2 zero
      R2 = R1 + Abar2 R1 = [[2.25,.75,1],[0,1.5,0],[0,0,2]]
    Relevance of the inputs for the classification token (row 0): [2.25, .75, 1].
    """
    a1 = [[[0.5, 0.5, 0], [0, 1, 0], [0, 0, 1]], [[0, 0.5, 0.5], [0.5, 0.5, 0], [0, 0, 1]]]
    g1 = [[[2, -2, 0], [0, 1, 0], [0, 0, 0]], [[4, 2, -4], [0, 0, 0], [0, 0, 2]]]
    a2 = [[[0, 0, 1], [0, 1, 0], [0, 1, 0]], [[0.5, 0, 0.5], [0, 1, 0], [0, 0, 1]]]
    g2 = [[[0, 0, 1], [0, 0, 0], [0, 0, 0]], [[2, 0, -1], [0, 0, 0], [0, 0, 0]]]
    r = grad_weighted_rollout(np.array([a1, a2], dtype=float), np.array([g1, g2], dtype=float))
    expected = np.array([[2.25, 0.75, 1.0], [0, 1.5, 0], [0, 0, 2.0]])
    np.testing.assert_allclose(r, expected, atol=1e-12)
    np.testing.assert_allclose(r[0], [2.25, 0.75, 1.0], atol=1e-12)


def test_grad_weighted_rollout_with_zero_gradients_is_identity():
    """Reference: Chefer et al. 2021: with no positive gradient-weighted attention R stays I (closed form)."""
    rng = np.random.default_rng(3)
    att = rng.random((3, 2, 4, 4))
    np.testing.assert_allclose(grad_weighted_rollout(att, -np.ones_like(att)), np.eye(4))
    with pytest.raises(ValueError):
        grad_weighted_rollout(att, att[:, :1])


@pytest.mark.parametrize("steps", [2, 3, 8, 32])
def test_gauss_legendre_is_exact_for_polynomials(steps):
    """Reference: Abramowitz & Stegun 25.4.29: m-node Gauss-Legendre integrates degree <= 2m-1 exactly;
    int_0^1 t^k dt = 1/(k+1) (closed form)."""
    alphas, weights = quadrature(steps, "gauss-legendre")
    assert np.all((alphas > 0) & (alphas < 1))
    for k in range(2 * steps):
        assert math.isclose(float((weights * alphas**k).sum()), 1.0 / (k + 1), rel_tol=1e-12)


def test_trapezoid_rule_matches_scipy():
    """Reference: scipy.integrate.trapezoid on the same nodes."""
    alphas, weights = quadrature(17, "trapezoid")
    f = np.exp(np.sin(3 * alphas))
    assert math.isclose(
        float((weights * f).sum()), float(scipy.integrate.trapezoid(f, alphas)), rel_tol=1e-12
    )
    assert alphas[0] == 0 and alphas[-1] == 1
    with pytest.raises(HeadcountError):
        quadrature(1)
    with pytest.raises(HeadcountError):
        quadrature(8, "simpson")  # type: ignore[arg-type]


@pytest.mark.parametrize("rule", ["gauss-legendre", "trapezoid"])
def test_integrated_gradients_linear_model_closed_form(rule):
    """Reference: Sundararajan et al. 2017, sec. 3: for F(x) = <w, x> + b, IG_i = (x_i - x'_i) w_i exactly."""
    gen = torch.Generator().manual_seed(0)
    n, d, outputs = 5, 4, 3
    w = torch.randn(outputs, n, d, generator=gen, dtype=torch.float64)
    b = torch.randn(outputs, dtype=torch.float64, generator=gen)
    x = torch.randn(n, d, generator=gen, dtype=torch.float64)
    x0 = torch.randn(n, d, generator=gen, dtype=torch.float64)

    def forward(e: torch.Tensor) -> torch.Tensor:
        return torch.einsum("snd,knd->sk", e, w) + b

    result = integrate_path(forward, x, x0, [2, 0], steps=4, rule=rule, rows_per_pass=3)
    for row, k in enumerate([2, 0]):
        closed = ((x - x0) * w[k]).sum(-1).numpy()
        np.testing.assert_allclose(result.attributions[row], closed, rtol=1e-12, atol=1e-12)
        assert math.isclose(float(result.output_input[row]), float(forward(x[None])[0, k]), rel_tol=1e-12)
        assert math.isclose(float(result.output_baseline[row]), float(forward(x0[None])[0, k]), rel_tol=1e-12)
    np.testing.assert_allclose(result.completeness_error, 0.0, atol=1e-12)


def test_integrated_gradients_quadratic_model_matches_closed_form():
    """Reference: Sundararajan et al. 2017, eq. (1) by hand: F(x) = sum_i c_i (sum_d x_id)^2, baseline 0
    -> IG_i = c_i * (sum_d x_id)^2 (int_0^1 2 a da = 1); 2 Gauss-Legendre nodes integrate degree 3 exactly."""
    c = torch.tensor([1.0, -2.0, 0.5], dtype=torch.float64)
    x = torch.tensor([[1.0, 2.0], [0.5, -1.0], [3.0, 0.0]], dtype=torch.float64)

    def forward(e: torch.Tensor) -> torch.Tensor:
        return (c * e.sum(-1) ** 2).sum(-1, keepdim=True)

    result = integrate_path(forward, x, torch.zeros_like(x), [0], steps=2)
    np.testing.assert_allclose(result.attributions[0], [9.0, -0.5, 4.5], atol=1e-12)


@settings(max_examples=80, deadline=None)
@given(
    st.lists(
        st.tuples(st.integers(-4, 4), st.floats(-5, 5, allow_nan=False, allow_infinity=False)),
        min_size=3,
        max_size=25,
    )
)
def test_spearman_matches_scipy(pairs):
    """Reference: scipy.stats.spearmanr (mid-ranks for ties)."""
    a = np.array([p[0] for p in pairs], dtype=float)
    b = np.array([p[1] for p in pairs], dtype=float)
    ours = spearman(a, b)
    if np.ptp(a) == 0 or np.ptp(b) == 0:
        assert math.isnan(ours)
        return
    ref = scipy.stats.spearmanr(a, b).statistic
    assert math.isclose(ours, float(ref), rel_tol=1e-9, abs_tol=1e-12)


def test_average_ranks_match_scipy_rankdata():
    """Reference: scipy.stats.rankdata(method='average')."""
    x = np.array([3.0, 1.0, 3.0, 2.0, 3.0, -1.0, 2.0])
    np.testing.assert_array_equal(average_ranks(x), scipy.stats.rankdata(x, method="average"))


def test_merge_to_words_sums_pieces():
    """Reference: common practice, no source: a word's relevance is the sum of its pieces'."""
    values = np.array([[10.0, 1.0, 2.0, 3.0, 20.0], [0.0, 1.0, 1.0, 1.0, 0.0]])
    np.testing.assert_allclose(merge_to_words(values, [[1, 2], [3]]), [[3.0, 3.0], [2.0, 1.0]])


def test_faithfulness_table_and_hints():
    """Reference: scipy.stats.spearmanr for the table; the hint rule (rho < 0.3) is this project's."""
    occlusion = np.array([0.5, 0.1, 0.0, 0.3])
    relevances = {
        "rollout": np.array([0.0, 1.0, 2.0, 0.5]),  # reversed order: disagrees
        "grad_rollout": np.array([4.0, 2.0, 1.0, 3.0]),  # same order: agrees
        "integrated_gradients": np.array([1.0, 1.0, 1.0, 1.0]),  # constant: undefined
    }
    table = faithfulness(relevances, occlusion)
    assert math.isclose(table["rollout"], scipy.stats.spearmanr(relevances["rollout"], occlusion).statistic)
    assert table["rollout"] < AGREEMENT_THRESHOLD
    assert math.isclose(table["grad_rollout"], 1.0)
    assert table["integrated_gradients"] is None
    hints = faithfulness_hints(table, occlusion)
    assert len(hints) == 1
    assert "attention rollout" in hints[0] and "do not read it as the reason" in hints[0]
    assert "gradient-weighted" not in hints[0]
    assert faithfulness_hints({"rollout": 0.9}, occlusion) == []
    assert "too few" in faithfulness_hints({"rollout": None}, occlusion[:2])[0]
    small = faithfulness_hints({"rollout": 0.9}, occlusion * 1e-3)
    assert len(small) == 1 and "tiny differences" in small[0]


def test_occluded_rows_remove_and_mask():
    """Reference: leave-one-word-out erasure, Li, Monroe & Jurafsky 2016; rows written out by hand."""
    ids = torch.tensor([101, 7, 8, 9, 102])
    mask = torch.tensor([1, 1, 1, 1, 1])
    types = torch.tensor([0, 0, 0, 1, 1])
    rows = occluded_rows(ids, mask, {"token_type_ids": types}, [[1, 2], [3]], mode="remove", pad_id=0)
    assert rows["input_ids"].tolist() == [[101, 7, 8, 9, 102], [101, 9, 102, 0, 0], [101, 7, 8, 102, 0]]
    assert rows["attention_mask"].tolist() == [[1, 1, 1, 1, 1], [1, 1, 1, 0, 0], [1, 1, 1, 1, 0]]
    assert rows["token_type_ids"].tolist() == [[0, 0, 0, 1, 1], [0, 1, 1, 0, 0], [0, 0, 0, 1, 0]]
    masked = occluded_rows(ids, mask, {}, [[1, 2], [3]], mode="mask", replacement_id=103)
    assert masked["input_ids"].tolist() == [
        [101, 7, 8, 9, 102],
        [101, 103, 103, 9, 102],
        [101, 7, 8, 103, 102],
    ]
    assert masked["attention_mask"].tolist() == [[1] * 5] * 3
    with pytest.raises(HeadcountError):
        occluded_rows(ids, mask, {}, [[1]], mode="mask")
    with pytest.raises(HeadcountError):
        occluded_rows(ids, mask, {}, [[1]], mode="blank")  # type: ignore[arg-type]


def test_heads_that_changed_orders_by_absolute_change():
    """Reference: by hand: changes [[+.1, -.5], [0, +.3]] -> order (0,1), (1,1), (0,0)."""
    before = np.array([[1.0, 1.0], [1.0, 1.0]])
    after = np.array([[1.1, 0.5], [1.0, 1.3]])
    top = heads_that_changed(before, after, 3)
    assert [(h.layer, h.head) for h in top] == [(0, 1), (1, 1), (0, 0)]
    assert math.isclose(top[0].change, -0.5) and math.isclose(top[1].change, 0.3)


def test_word_changes_align_an_edit():
    """Reference: difflib.SequenceMatcher opcodes for a one-word replacement and an insertion (by hand)."""
    changes = word_changes(["i", "want", "to", "cancel", "it"], ["I", "want", "to", "change", "it", "now"])
    edits = [(c.op, c.original, c.edited) for c in changes if c.op != "equal"]
    assert edits == [("replace", (3, 4), (3, 4)), ("insert", (5, 5), (5, 6))]


def test_adaptive_steps_double_until_completeness_holds():
    """Adaptive Integrated Gradients returns the first of 8, 16, 32 ... nodes whose completeness error is within
    1% of F(x) - F(x'), and the same attributions as a fixed-step call with that many nodes.

    Reference: Sundararajan, Taly & Yan 2017, sec. 5 (increase the steps until the attributions add up to the
    score difference); the closed form F(x) - F(x') of F(z) = exp(sum_i c_i z_i) and F(z) = sin(c . z).
    The trapezoid rule converges slowly (error ~ 1/steps^2), so it needs several doublings here.
    """
    torch.manual_seed(0)
    x = torch.randn(5, 3, dtype=torch.float64)
    base = torch.zeros_like(x)
    c = torch.linspace(0.5, 1.5, 15, dtype=torch.float64).reshape(5, 3)

    def forward(z: torch.Tensor) -> torch.Tensor:
        s = (z * c).sum((1, 2))
        return torch.stack([torch.exp(s), torch.sin(3 * s)], -1)

    tries = {"gauss-legendre": (8, 16, 32, 64, 128), "clenshaw-curtis": (9, 17, 33, 65, 129)}
    tries["trapezoid"] = tries["clenshaw-curtis"]  # nested rules: 8, 16, 32 ... intervals
    for rule, counts in tries.items():
        got = integrate_adaptively(forward, x, base, [0, 1], rule=rule, tolerance=0.01)
        assert got.tolerance == 0.01 and got.steps in counts
        assert got.complete_within(0.01)
        exact = forward(x[None])[0] - forward(base[None])[0]
        np.testing.assert_allclose(got.output_input - got.output_baseline, exact.numpy(), rtol=1e-12)
        assert np.all(np.abs(got.completeness_error) <= 0.01 * np.maximum(np.abs(exact.numpy()), 0.1))
        fixed = integrate_path(forward, x, base, [0, 1], steps=got.steps, rule=rule)
        np.testing.assert_allclose(got.attributions, fixed.attributions, rtol=1e-12)
        for fewer_steps in counts[: counts.index(got.steps)]:
            fewer = integrate_path(forward, x, base, [0, 1], steps=fewer_steps, rule=rule)
            assert not fewer.complete_within(0.01), (rule, fewer_steps)
    slow = integrate_adaptively(forward, x, base, [0, 1], rule="trapezoid", tolerance=0.01)
    assert slow.steps > 9  # the trapezoid rule needed at least one doubling
    capped = integrate_adaptively(forward, x, base, [0, 1], rule="trapezoid", tolerance=1e-12, max_steps=33)
    assert capped.steps == 33 and not capped.complete_within(1e-12)


@pytest.mark.parametrize("steps", [2, 3, 5, 9, 17])
def test_clenshaw_curtis_is_exact_up_to_its_degree_and_nested(steps):
    """Reference: Clenshaw & Curtis 1960: N + 1 Chebyshev extreme points integrate polynomials of degree <= N
    exactly (closed form int_0^1 a^p da = 1 / (p + 1)); the nodes for N intervals are among those for 2N;
    for a smooth function the rule agrees with scipy.integrate.quad."""
    alphas, weights = quadrature(steps, "clenshaw-curtis")
    assert alphas[0] == 0.0 and alphas[-1] == 1.0 and np.all(np.diff(alphas) > 0)
    for p in range(steps):
        np.testing.assert_allclose((weights * alphas**p).sum(), 1.0 / (p + 1), rtol=1e-12, atol=1e-14)
    finer, _ = quadrature(2 * steps - 1, "clenshaw-curtis")
    assert set(alphas.tolist()) <= set(finer.tolist())
    a33, w33 = quadrature(33, "clenshaw-curtis")
    ref, _ = scipy.integrate.quad(lambda a: math.cos(5 * a) * math.exp(a), 0.0, 1.0)
    assert abs((w33 * np.cos(5 * a33) * np.exp(a33)).sum() - ref) < 1e-12
