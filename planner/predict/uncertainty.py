"""First-order uncertainty budget of the all-bound analysis (GUM, JCGM 100:2008).

The all-bound analysis of the class's readings (:mod:`planner.analysis`) computes, from the
recipe's nominal concentrations and the blank-subtracted readings, the molar absorptivity from
the standard curve and K from each test mixture with the 1:1 expression. This module
propagates every input uncertainty of one bench's set of mixtures into those results, with the
law of propagation of uncertainty for independent inputs (JCGM 100:2008, eq. 10), and lists the
contributors with their share of the variance.

Measurement models
------------------
Each model is written once, symbolically, in :func:`_models`; sympy derives its sensitivity
coefficients, which are lambdified to numpy and evaluated over all mixtures at once. The
models are chained through their intermediate quantities (JCGM 100:2008, 5.1.2 and 5.1.3):

1. Mixing, for one component of one mixture and stock k of it (R and W collect the other
   stocks): in a tube c = (c_k (1 + r_k) V_k + R) / (V_k + W); in a flask of volume V_f with
   the diluent d to the mark, c = (c_k (1 + r_k) V_k + R + c_d (1 + r_d)(V_f - V_k - W)) / V_f.
   r_k is the relative error of stock k's concentration (estimate 0).
2. Standard curve through the origin, for standard k (P, C, Q collect the other standards'
   c A, c and c^2): eps = (c_k (A_k - A_0) + P - A_0 C) / (b (c_k^2 + Q)), A_0 the blank
   reading; with an intercept, the ordinary least-squares slope divided by b (Draper and
   Smith, Applied Regression Analysis, 3rd ed., 1998, eq. 1.2.9, from memory).
3. K of one test mixture: x = (A - A_0) / (eps b), K = x / ((M - x)(L - x)), M and L the
   nominal totals of the excess and limiting reagent, eps from the curve through the origin.
4. The mean of K over the test mixtures.

The inputs and their error model are those of :mod:`planner.predict._experiment` (the same as
the Monte Carlo's): stock concentrations (one relative error per stock), each device's
systematic error, each delivery's random error, each flask's volume, and each reading's noise.
The readings are the predicted ones (exact equilibrium, stray light applied), so the bias of
the all-bound assumption is in the estimates, as it will be at the bench.

sympy is imported here only, lazily, and only ever sees expressions built from Python symbols
in this module: no text from a plan file reaches it.

References
----------
JCGM 100:2008, Evaluation of measurement data -- Guide to the expression of uncertainty in
measurement (GUM), sections 5.1 (eq. 10) and 6.2-6.3 (expanded uncertainty).
"""

from __future__ import annotations

import functools
import math
from collections.abc import Callable, Sequence
from typing import Any, cast

import numpy as np
from numpy.typing import NDArray

from planner.analysis import all_bound_K_from_x, global_fit_gain, global_fit_jacobian
from planner.forward import predict_readings, total_reading_sensitivity
from planner.inputs import PlanInputs
from planner.predict._experiment import BenchExperiment, bench_experiment
from planner.predict.bias import bias_causes
from planner.predict.medium import medium_effect
from planner.records import record
from planner.result import (
    COVERAGE_FACTOR_95,
    Budget,
    Contributor,
    GlobalFitPrediction,
    Mixture,
    MixtureUncertainty,
    Prediction,
    Role,
    UncertaintyResult,
)

__all__ = [
    "COVERAGE_FACTOR_95",
    "Budget",
    "Contributor",
    "MixtureUncertainty",
    "UncertaintyResult",
    "prediction_from",
    "propagate",
    "reading_uncertainties",
]

_Function = Callable[..., Any]


@record
class _Models:
    """Lambdified sensitivity coefficients and their formulas (see the module notes)."""

    functions: dict[str, _Function]
    formulas: dict[str, str]


def symbolic_models() -> tuple[dict[str, Any], dict[str, tuple[Any, ...]], dict[str, str]]:
    """Write every measurement model once and let sympy differentiate it.

    Returns
    -------
    tuple
        (expressions by name, argument symbols by name, formula text by name). Used to
        generate :mod:`planner.predict._sensitivities` (see :func:`generated_source`) and by
        the test that checks that module is up to date.
    """
    import sympy as sp

    c_k, r_k, V_k, R, W = sp.symbols("c_k r_k V_k R W", real=True)
    c_d, r_d, V_f = sp.symbols("c_d r_d V_f", real=True)
    A_k, A_0, P, C, Q, S, n, b = sp.symbols("A_k A_0 P C Q S n b", real=True)
    A, M, L, x, eps = sp.symbols("A M L x ε", real=True)

    # 1. Mixing (amount conservation on dilution).
    tube = (c_k * (1 + r_k) * V_k + R) / (V_k + W)
    flask = (c_k * (1 + r_k) * V_k + R + c_d * (1 + r_d) * (V_f - V_k - W)) / V_f
    at_estimate = {r_k: 0, r_d: 0}
    mixing_args = (c_k, V_k, R, W, c_d, V_f)
    derivatives = {
        "tube ∂c/∂V_k": sp.diff(tube, V_k).subs(at_estimate),
        "∂c/∂r_k": sp.diff(tube, r_k).subs(at_estimate),
        "flask ∂c/∂V_k": sp.diff(flask, V_k).subs(at_estimate),
        "flask ∂c/∂V_f": sp.diff(flask, V_f).subs(at_estimate),
        "flask ∂c/∂r_k": sp.diff(flask, r_k).subs(at_estimate),
    }
    # 2. Standard curve through the origin, and with an intercept (ordinary least squares).
    origin = (c_k * (A_k - A_0) + P - A_0 * C) / (b * (c_k**2 + Q))
    sum_c, sum_a = c_k + C, (A_k - A_0) + (S - (n - 1) * A_0)
    sum_ca, sum_cc = c_k * (A_k - A_0) + P - A_0 * C, c_k**2 + Q
    intercept = (n * sum_ca - sum_c * sum_a) / (b * (n * sum_cc - sum_c**2))
    curve_args = (c_k, A_k, A_0, P, C, Q, S, n, b)
    # 3. K of one test mixture with the 1:1 expression, written once in planner.analysis.
    product = (A - A_0) / (eps * b)
    k_model = all_bound_K_from_x(x, M, L)
    derivatives |= {
        "ε": origin,
        "∂ε/∂c_k": sp.diff(origin, c_k),
        "∂ε/∂A_k": sp.diff(origin, A_k),
        "∂ε/∂A_0": sp.diff(origin, A_0),
        "ε'": intercept,
        "∂ε'/∂c_k": sp.diff(intercept, c_k),
        "∂ε'/∂A_k": sp.diff(intercept, A_k),
        "∂ε'/∂A_0": sp.diff(intercept, A_0),
        "x": product,
        "∂x/∂A": sp.diff(product, A),
        "∂x/∂A_0": sp.diff(product, A_0),
        "∂x/∂ε": sp.diff(product, eps),
        "K": k_model,
        "∂K/∂x": sp.diff(k_model, x),
        "∂K/∂M": sp.diff(k_model, M),
        "∂K/∂L": sp.diff(k_model, L),
    }
    arguments = {
        "mixing": mixing_args,
        "curve": curve_args,
        "x": (A, A_0, eps, b),
        "K": (x, M, L),
    }
    group = {
        "tube ∂c/∂V_k": "mixing",
        "∂c/∂r_k": "mixing",
        "flask ∂c/∂V_k": "mixing",
        "flask ∂c/∂V_f": "mixing",
        "flask ∂c/∂r_k": "mixing",
        "x": "x",
        "∂x/∂A": "x",
        "∂x/∂A_0": "x",
        "∂x/∂ε": "x",
        "K": "K",
        "∂K/∂x": "K",
        "∂K/∂M": "K",
        "∂K/∂L": "K",
    }
    args_by_name = {name: arguments[group.get(name, "curve")] for name in derivatives}
    formulas = {name: sp.sstr(expression) for name, expression in derivatives.items()}
    formulas["c (tube)"] = sp.sstr(tube)
    formulas["c (flask)"] = sp.sstr(flask)
    return derivatives, args_by_name, formulas


def generated_source() -> str:
    """Python source of :mod:`planner.predict._sensitivities`, printed by sympy.

    Each derivative becomes a plain numpy function, so a plan needs no sympy at run time
    (importing and differentiating costs about 0.9 s, most of the CLI's time budget).
    Regenerate after changing a model (DEVELOPERS.md gives the one-line command that writes
    ``generated_source()`` to ``planner/predict/_sensitivities.py``).
    """
    import sympy as sp
    from sympy.printing.numpy import NumPyPrinter

    expressions, arguments, formulas = symbolic_models()
    lines = [
        '"""Sensitivity coefficients of the measurement models, generated by sympy.',
        "",
        "Do not edit: made by planner.predict.uncertainty.generated_source() from the models in",
        "planner.predict.uncertainty.symbolic_models(); tests check that it is up to date.",
        '"""',
        "",
        "# ruff: noqa",
        "# mypy: ignore-errors",
        "import numpy",
        "",
    ]
    names: dict[str, str] = {}
    for index, (name, expression) in enumerate(expressions.items()):
        function = f"_f{index}"
        names[name] = function
        symbols = arguments[name]
        plain = [f"a{i}" for i in range(len(symbols))]
        renamed = expression.subs(dict(zip(symbols, sp.symbols(plain), strict=True)))
        printer = NumPyPrinter({"fully_qualified_modules": True, "allow_unknown_functions": False})
        lines += [
            "",
            f"def {function}({', '.join(plain)}):",
            f"    # {name}",
            f"    return {printer.doprint(renamed)}",
            "",
        ]
    lines += ["", "FUNCTIONS = {"]
    lines += [f"    {name!r}: {function}," for name, function in names.items()]
    lines += ["}", "", "FORMULAS = {"]
    lines += [f"    {name!r}: {text!r}," for name, text in formulas.items()]
    lines += ["}", ""]
    return "\n".join(lines)


@functools.cache
def _models() -> _Models:
    """The sensitivity functions and formulas, from the sympy-generated module."""
    from planner.predict import _sensitivities

    functions = cast(dict[str, _Function], dict(_sensitivities.FUNCTIONS))
    return _Models(functions=functions, formulas=dict(_sensitivities.FORMULAS))


def _broadcast(value: Any, shape: tuple[int, ...]) -> NDArray[np.float64]:
    """A lambdified constant comes back as a scalar: give it the arguments' shape."""
    return np.broadcast_to(np.asarray(value, dtype=float), shape).astype(float)


@record
class _Inputs:
    """The elementary inputs: names, kinds, units, u and the first-stage Jacobian."""

    names: tuple[str, ...]
    kinds: tuple[str, ...]
    units: tuple[str, ...]
    u: NDArray[np.float64]
    # d(component total of mixture m, component j)/d(input z), shape (n_mix, n_comp, n_z).
    totals_jacobian: NDArray[np.float64]
    # d(reading of mixture m)/d(input z) besides the composition: 1 for the mixture's own
    # reading noise, and for the blank cuvette's offset on every blank, shape (n_mix, n_z).
    reading: NDArray[np.float64]
    # Mixtures each input acts on (for the formula text).
    touches: tuple[frozenset[int], ...]


def _mixing_sensitivities(
    ex: BenchExperiment, models: _Models
) -> tuple[NDArray[np.float64], NDArray[np.float64], NDArray[np.float64]]:
    """dc/dV_k, dc/dr_k (n_mix, n_stocks, n_comp) and dc/dV_f (n_mix, n_comp) at the estimate."""
    f = models.functions
    volume = ex.total_volume_mL[:, None, None]
    v_k = ex.volumes_mL[:, :, None]
    c_k = ex.stock_M[None, :, :]
    amount = (ex.layout.totals_M * ex.total_volume_mL[:, None])[:, None, :]
    shape = (len(ex.mixture_ids), len(ex.stock_ids), len(ex.components))
    if ex.in_flask:
        d = ex.diluent
        c_d = ex.stock_M[d][None, None, :] if d is not None else np.zeros((1, 1, shape[2]))
        v_d = ex.volumes_mL[:, d][:, None, None] if d is not None else np.zeros((shape[0], 1, 1))
        rest = amount - c_d * v_d - c_k * v_k
        others = volume - v_d - v_k
        dv = _broadcast(f["flask ∂c/∂V_k"](c_k, v_k, rest, others, c_d, volume), shape)
        dvf = _broadcast(f["flask ∂c/∂V_f"](c_k, v_k, rest, others, c_d, volume), shape)[:, 0, :]
    else:
        rest = amount - c_k * v_k
        others = volume - v_k
        dv = _broadcast(f["tube ∂c/∂V_k"](c_k, v_k, rest, others, 0.0, volume), shape)
        dvf = np.zeros((shape[0], shape[2]))
    dr = _broadcast(f["∂c/∂r_k"](c_k, v_k, amount, volume - v_k, 0.0, volume), shape)
    return dv, dr, dvf


def _elementary_inputs(ex: BenchExperiment, models: _Models) -> _Inputs:
    dv, dr, dvf = _mixing_sensitivities(ex, models)
    n_mix, n_comp = len(ex.mixture_ids), len(ex.components)
    names: list[str] = []
    kinds: list[str] = []
    units: list[str] = []
    u: list[float] = []
    columns: list[NDArray[np.float64]] = []
    touches: list[frozenset[int]] = []

    def add(name: str, kind: str, unit: str, value: float, column: NDArray[np.float64]) -> None:
        names.append(name)
        kinds.append(kind)
        units.append(unit)
        u.append(value)
        columns.append(column)
        touches.append(frozenset(int(m) for m in np.flatnonzero(np.any(column != 0, axis=1))))

    for s, stock in enumerate(ex.stock_ids):
        if ex.u_relative_stock[s] > 0:
            add(
                f"stock {stock} concentration",
                "stock",
                "relative",
                ex.u_relative_stock[s],
                dr[:, s],
            )
    for device, u_sys in zip(ex.systematic_devices, ex.u_systematic_mL, strict=True):
        column = np.zeros((n_mix, n_comp))
        for d in ex.deliveries:
            if d.device == device:
                column[d.mixture] += dv[d.mixture, d.stock]
        add(f"{device} systematic error", "device-systematic", "mL", float(u_sys), column)
    seen: dict[tuple[int, int, str], int] = {}
    for d in ex.deliveries:
        # The device's random error and the technique's, independent: in quadrature.
        u_delivery = math.hypot(d.u_random_mL, d.u_technique_mL)
        if u_delivery <= 0:
            continue
        key = (d.mixture, d.stock, d.device)
        seen[key] = seen.get(key, 0) + 1
        label = f"{d.device} delivering {ex.stock_ids[d.stock]} into {ex.mixture_ids[d.mixture]}"
        if seen[key] > 1:
            label += f" (delivery {seen[key]})"
        column = np.zeros((n_mix, n_comp))
        column[d.mixture] = dv[d.mixture, d.stock]
        add(label, "delivery-random", "mL", u_delivery, column)
    if ex.in_flask and ex.u_flask_mL > 0:
        for m, mixture_id in enumerate(ex.mixture_ids):
            column = np.zeros((n_mix, n_comp))
            column[m] = dvf[m]
            add(f"flask volume of {mixture_id}", "flask", "mL", ex.u_flask_mL, column)
    first_reading = len(names)
    for m, mixture_id in enumerate(ex.mixture_ids):
        column = np.zeros((n_mix, n_comp))
        add(f"reading of {mixture_id}", "reading", "absorbance", ex.reading_sd[m], column)
        touches[-1] = frozenset({m})
    # Inputs that move readings directly: (input index, d reading/d input per mixture).
    moves: list[tuple[int, NDArray[np.float64]]] = [
        (first_reading + m, np.eye(n_mix)[m]) for m in range(n_mix)
    ]
    blanks = frozenset(int(m) for m in ex.layout.blanks)
    if ex.blank_offset_sd > 0 and blanks:
        add(
            "blank cuvette offset",
            "reading",
            "absorbance",
            ex.blank_offset_sd,
            np.zeros((n_mix, n_comp)),
        )
        touches[-1] = blanks
        moves.append((len(names) - 1, np.isin(np.arange(n_mix), sorted(blanks)).astype(float)))
    if ex.temperature_sd_C > 0 and np.any(ex.reading_per_kelvin != 0):
        add(
            "bench temperature",
            "temperature",
            "°C",
            ex.temperature_sd_C,
            np.zeros((n_mix, n_comp)),
        )
        touches[-1] = frozenset(range(n_mix))
        moves.append((len(names) - 1, ex.reading_per_kelvin))
    jacobian = np.stack(columns, axis=2) if columns else np.zeros((n_mix, n_comp, 0))
    direct = np.zeros((n_mix, len(names)))
    for z, column_of_readings in moves:
        direct[:, z] = column_of_readings
    return _Inputs(
        names=tuple(names),
        kinds=tuple(kinds),
        units=tuple(units),
        u=np.array(u, dtype=float),
        totals_jacobian=jacobian,
        reading=direct,
        touches=tuple(touches),
    )


@record
class _Gradients:
    """Value and gradient (over the elementary inputs) of every measurand."""

    epsilon: float
    g_epsilon: NDArray[np.float64]
    epsilon_intercept: float
    g_epsilon_intercept: NDArray[np.float64]
    K: NDArray[np.float64]
    g_K: NDArray[np.float64]  # (n_test, n_z)


def _curve(
    ex: BenchExperiment, inputs: _Inputs, models: _Models, prime: str
) -> tuple[float, NDArray[np.float64]]:
    """Value and gradient of eps (prime "") or eps' (prime "'") from the standard curve."""
    f = models.functions
    std = ex.layout.standards
    c = ex.layout.totals_M[std, ex.layout.limiting]
    a = ex.readings[std]
    a0 = float(ex.readings[ex.layout.blanks].mean())
    b = ex.path_length_cm
    n = float(len(std))
    # Sums over the other standards (the "rest" symbols of the model).
    p = (c * a).sum() - c * a
    big_c = c.sum() - c
    q = (c * c).sum() - c * c
    s = a.sum() - a
    args = (c, a, a0, p, big_c, q, s, n, b)
    shape = c.shape
    value = float(_broadcast(f["ε" + prime](*args), shape)[0])
    d_c = _broadcast(f["∂ε" + prime + "/∂c_k"](*args), shape)
    d_a = _broadcast(f["∂ε" + prime + "/∂A_k"](*args), shape)
    d_a0 = float(_broadcast(f["∂ε" + prime + "/∂A_0"](*args), shape)[0])
    gradient = np.einsum("k,kz->z", d_c, inputs.totals_jacobian[std, ex.layout.limiting, :])
    gradient += d_a @ inputs.reading[std]
    gradient += d_a0 / len(ex.layout.blanks) * inputs.reading[ex.layout.blanks].sum(axis=0)
    return value, gradient


def _gradients(ex: BenchExperiment, inputs: _Inputs, models: _Models) -> _Gradients:
    f = models.functions
    epsilon, g_eps = _curve(ex, inputs, models, "")
    if len(ex.layout.standards) >= 2:
        epsilon_i, g_eps_i = _curve(ex, inputs, models, "'")
    else:
        # A line with an intercept needs two standards; with one, report the curve through
        # the origin for both rather than a 0/0.
        epsilon_i, g_eps_i = epsilon, g_eps.copy()
    tst = ex.layout.tests
    b = ex.path_length_cm
    a = ex.readings[tst]
    a0 = float(ex.readings[ex.layout.blanks].mean())
    m_total = ex.layout.totals_M[tst, ex.layout.excess]
    l_total = ex.layout.totals_M[tst, ex.layout.limiting]
    shape = a.shape
    x = _broadcast(f["x"](a, a0, epsilon, b), shape)
    k = _broadcast(f["K"](x, m_total, l_total), shape)
    dk_dx = _broadcast(f["∂K/∂x"](x, m_total, l_total), shape)
    dk_dm = _broadcast(f["∂K/∂M"](x, m_total, l_total), shape)
    dk_dl = _broadcast(f["∂K/∂L"](x, m_total, l_total), shape)
    dx_da = _broadcast(f["∂x/∂A"](a, a0, epsilon, b), shape)
    dx_da0 = _broadcast(f["∂x/∂A_0"](a, a0, epsilon, b), shape)
    dx_deps = _broadcast(f["∂x/∂ε"](a, a0, epsilon, b), shape)
    jac = inputs.totals_jacobian
    g_k = (
        (dk_dx * dx_deps)[:, None] * g_eps[None, :]
        + dk_dm[:, None] * jac[tst, ex.layout.excess, :]
        + dk_dl[:, None] * jac[tst, ex.layout.limiting, :]
    )
    g_k += (dk_dx * dx_da)[:, None] * inputs.reading[tst]
    blank_reading = inputs.reading[ex.layout.blanks].sum(axis=0) / len(ex.layout.blanks)
    g_k += (dk_dx * dx_da0)[:, None] * blank_reading[None, :]
    return _Gradients(
        epsilon=epsilon,
        g_epsilon=g_eps,
        epsilon_intercept=epsilon_i,
        g_epsilon_intercept=g_eps_i,
        K=k,
        g_K=g_k,
    )


#: The chain of derivatives from one quantity of one mixture to a measurand, keyed by (the
#: measurand is K rather than eps, the mixture's role, the quantity): ``{p}`` is the prime of
#: eps' (the intercept fit), ``{s}`` the first stage (input to total), ``{n}`` the test count.
_CHAINS: dict[tuple[bool, Role, str], str] = {
    (False, "standard", "limiting"): "∂ε{p}/∂c_k·{s}",
    (False, "standard", "reading"): "∂ε{p}/∂A_k",
    (False, "blank", "reading"): "∂ε{p}/∂A_0/n_blanks",
    (True, "standard", "limiting"): "∂K_mean/∂ε·∂ε/∂c_k·{s}",
    (True, "standard", "reading"): "∂K_mean/∂ε·∂ε/∂A_k",
    (True, "test", "excess"): "(1/{n})·∂K/∂M·{s}",
    (True, "test", "limiting"): "(1/{n})·∂K/∂L·{s}",
    (True, "test", "reading"): "(1/{n})·∂K/∂x·∂x/∂A",
    (True, "blank", "reading"): "(∂K_mean/∂ε·∂ε/∂A_0 + (1/{n})·Σ_i ∂K/∂x·∂x/∂A_0)/n_blanks",
}


def _chain_terms(measurand: str, role: Role, component: str, stage1: str, n_tests: int) -> str:
    """The chain of derivatives from one quantity of one mixture to a measurand ("" when the
    quantity does not reach it)."""
    of_K = measurand not in {"epsilon", "epsilon_intercept"}
    prime = "'" if measurand == "epsilon_intercept" else ""
    return _CHAINS.get((of_K, role, component), "").format(p=prime, s=stage1, n=n_tests)


def _formula(
    measurand: str,
    z: int,
    ex: BenchExperiment,
    inputs: _Inputs,
    models: _Models,
    roles: Sequence[Role],
) -> str:
    """The coefficient of input z as a chain of model derivatives, with their formulas."""
    kind = inputs.kinds[z]
    if kind == "temperature":
        return (
            "Σ_m ∂y/∂A_m·∂A_m/∂T, where ∂A/∂T is van 't Hoff's d log10 β/dT = ΔH/(R T² ln 10) "
            "read through the equilibrium and the photometer (central difference)"
        )
    stage1 = {
        "stock": "∂c/∂r_k",
        "flask": "∂c/∂V_f",
        "reading": "",
    }.get(kind, "∂c/∂V_k")
    if measurand.endswith("_global_fit"):
        parameter = "log10 K" if measurand.startswith("K") else "ε"
        if kind == "reading":
            return (
                f"Σ_m G[{parameter}, m]·∂A_net,m/∂A, where G = (JᵀJ)⁻¹Jᵀ is the global fit's gain"
            )
        chain = f"Σ_m G[{parameter}, m]·∂A_net,m/∂c·{stage1}"
        if parameter == "log10 K":
            chain = f"K·ln 10·{chain}"
        return (
            f"{chain}, where G = (JᵀJ)⁻¹Jᵀ is the global fit's gain, ∂A/∂c the forward "
            "model's sensitivity (differentiated analytically)"
        )
    n_tests = len(ex.layout.tests)
    terms: list[str] = []
    jac = inputs.totals_jacobian[:, :, z]
    for m in sorted(inputs.touches[z]):
        if kind == "reading":
            parts = [("reading", True)]
        else:
            parts = [
                ("limiting", bool(jac[m, ex.layout.limiting] != 0)),
                ("excess", bool(jac[m, ex.layout.excess] != 0)),
            ]
        for component, present in parts:
            if present:
                term = _chain_terms(measurand, roles[m], component, stage1, n_tests)
                if term and term not in terms:
                    terms.append(term)
    if not terms:
        return ""
    chain = " + ".join(terms)
    if len(inputs.touches[z]) > 1:
        chain = f"Σ_m [{chain}]"
    formulas = models.formulas
    definitions = {
        "∂K_mean/∂ε": f"{'(1/' + str(n_tests) + ')'}·Σ_i ∂K/∂x·∂x/∂ε",
        "∂c/∂r_k": formulas["flask ∂c/∂r_k" if ex.in_flask else "∂c/∂r_k"],
        "∂c/∂V_k": formulas["flask ∂c/∂V_k" if ex.in_flask else "tube ∂c/∂V_k"],
        "∂c/∂V_f": formulas["flask ∂c/∂V_f"],
    }
    for name in (
        "∂ε/∂c_k",
        "∂ε/∂A_k",
        "∂ε/∂A_0",
        "∂ε'/∂c_k",
        "∂ε'/∂A_k",
        "∂ε'/∂A_0",
        "∂K/∂x",
        "∂K/∂M",
        "∂K/∂L",
        "∂x/∂A",
        "∂x/∂A_0",
        "∂x/∂ε",
    ):
        definitions[name] = formulas[name]
    used = [f"{name} = {text}" for name, text in definitions.items() if name in chain]
    if "∂K_mean/∂ε" in chain:
        used.append(f"∂x/∂ε = {formulas['∂x/∂ε']}")
    unique = list(dict.fromkeys(used))
    return f"{chain}, where " + "; ".join(unique)


def _budget(
    measurand: str,
    value: float,
    gradient: NDArray[np.float64],
    unit: str,
    ex: BenchExperiment,
    inputs: _Inputs,
    models: _Models,
    roles: Sequence[Role],
) -> Budget:
    contributions = gradient * inputs.u
    variance = float((contributions**2).sum())
    order = np.argsort(-np.abs(contributions), kind="stable")
    rows = []
    for z in order:
        if contributions[z] == 0:
            continue
        rows.append(
            Contributor(
                input=inputs.names[z],
                kind=inputs.kinds[z],
                standard_uncertainty=float(inputs.u[z]),
                unit=inputs.units[z],
                sensitivity=float(gradient[z]),
                contribution=float(abs(contributions[z])),
                share=float(contributions[z] ** 2 / variance) if variance > 0 else 0.0,
                formula=_formula(measurand, int(z), ex, inputs, models, roles),
            )
        )
    return Budget(
        measurand=measurand,
        value=value,
        standard_uncertainty=float(np.sqrt(variance)),
        unit=unit,
        contributors=tuple(rows),
    )


def _reading_sensitivity(inputs: PlanInputs, ex: BenchExperiment) -> NDArray[np.float64]:
    """d(reading)/d(component total) of every mixture, shape (n_mix, n_comp) [L/mol].

    The equilibrium has no closed form in general; the forward model's exact derivative
    (:func:`planner.forward.total_reading_sensitivity`, the mass balances differentiated
    implicitly) gives this one sensitivity, 0 for a component a mixture does not hold.
    """
    totals = ex.layout.totals_M
    readings = predict_readings(inputs.reaction, inputs.instrument, totals)
    return np.stack(
        [
            total_reading_sensitivity(inputs.reaction, inputs.instrument, readings, totals, j)
            for j in range(len(ex.components))
        ],
        axis=1,
    )


def _reading_gradient(
    inputs: PlanInputs, ex: BenchExperiment, elementary: _Inputs
) -> NDArray[np.float64]:
    """d(reading of mixture m)/d(elementary input z), shape (n_mix, n_z).

    A reading responds to the mixture's actual composition through the equilibrium and the
    photometer, and to its own reading noise with sensitivity 1.
    """
    d_reading = _reading_sensitivity(inputs, ex)
    gradient = np.einsum("mj,mjz->mz", d_reading, elementary.totals_jacobian)
    gradient += elementary.reading
    result: NDArray[np.float64] = gradient
    return result


def _per_mixture(
    ex: BenchExperiment, elementary: _Inputs, reading_gradient: NDArray[np.float64]
) -> tuple[MixtureUncertainty, ...]:
    """Each mixture's composition and reading uncertainty (the reading responds to the actual
    composition through the equilibrium and the photometer, plus the reading noise)."""
    u = elementary.u
    jac = elementary.totals_jacobian
    u_totals = np.sqrt(np.einsum("mjz,z->mj", jac**2, u**2))
    u_reading = np.sqrt(((reading_gradient * u[None, :]) ** 2).sum(axis=1))
    return tuple(
        MixtureUncertainty(
            id=mixture_id,
            totals_M={c: float(ex.layout.totals_M[m, j]) for j, c in enumerate(ex.components)},
            u_totals_M={c: float(u_totals[m, j]) for j, c in enumerate(ex.components)},
            absorbance=float(ex.readings[m]),
            u_absorbance=float(u_reading[m]),
        )
        for m, mixture_id in enumerate(ex.mixture_ids)
    )


def reading_uncertainties(
    inputs: PlanInputs, mixtures: Sequence[Mixture]
) -> tuple[MixtureUncertainty, ...]:
    """First-order uncertainty of every mixture's composition and reading, any set of mixtures.

    The same per-mixture part as :func:`propagate` (which needs a blank, a standard and a test
    for the analysis), for plans that cannot be analysed, so that every plan's u(A) comes from
    one model.

    Parameters
    ----------
    inputs
        The validated plan.
    mixtures
        Any mixtures of the plan.

    Returns
    -------
    tuple of MixtureUncertainty
        In plan order.
    """
    ex = bench_experiment(inputs, mixtures, for_analysis=False)
    elementary = _elementary_inputs(ex, _models())
    return _per_mixture(ex, elementary, _reading_gradient(inputs, ex, elementary))


def propagate(inputs: PlanInputs, mixtures: Sequence[Mixture]) -> UncertaintyResult:
    """First-order uncertainty of the all-bound analysis of one bench's set of mixtures.

    Parameters
    ----------
    inputs
        The validated plan.
    mixtures
        The plan's mixtures (at least one blank, one standard and one test).

    Returns
    -------
    UncertaintyResult
        Budgets of eps (through the origin and with an intercept) and of the mean K, K and
        u(K) per test, and each mixture's composition and reading uncertainty.

    Raises
    ------
    InvalidInputError
        The plan lacks a blank, a standard or a test, or names a device not on the shelf.

    Notes
    -----
    u_c^2(y) = sum_z (dy/dz)^2 u^2(z) over independent elementary inputs z (JCGM 100:2008,
    eq. 10); systematic errors shared by several deliveries are one input each, which carries
    their correlation. See the module notes for the models and the error model.
    """
    ex = bench_experiment(inputs, mixtures)
    models = _models()
    elementary = _elementary_inputs(ex, models)
    gradients = _gradients(ex, elementary, models)
    roles = [m.role for m in mixtures]
    n_tests = len(ex.layout.tests)
    epsilon = _budget(
        "epsilon",
        gradients.epsilon,
        gradients.g_epsilon,
        "L mol-1 cm-1",
        ex,
        elementary,
        models,
        roles,
    )
    epsilon_i = _budget(
        "epsilon_intercept",
        gradients.epsilon_intercept,
        gradients.g_epsilon_intercept,
        "L mol-1 cm-1",
        ex,
        elementary,
        models,
        roles,
    )
    k_mean = _budget(
        "K",
        float(gradients.K.mean()),
        gradients.g_K.sum(axis=0) / n_tests,
        "L/mol",
        ex,
        elementary,
        models,
        roles,
    )
    u = elementary.u
    u_k = np.sqrt(((gradients.g_K * u[None, :]) ** 2).sum(axis=1))
    reading_gradient = _reading_gradient(inputs, ex, elementary)
    per_mixture = _per_mixture(ex, elementary, reading_gradient)
    fit_epsilon, fit_K = _global_fit_budgets(
        inputs, ex, elementary, models, roles, reading_gradient
    )
    medium = medium_effect(inputs, mixtures, ex.layout)
    return UncertaintyResult(
        epsilon=epsilon,
        epsilon_intercept=epsilon_i,
        K=k_mean,
        K_per_test=tuple(
            (float(value), float(sd)) for value, sd in zip(gradients.K, u_k, strict=True)
        ),
        mixtures=per_mixture,
        K_true=ex.layout.K_true,
        epsilon_true=ex.layout.epsilon_true,
        test_ids=tuple(ex.mixture_ids[i] for i in ex.layout.tests),
        global_fit_epsilon=fit_epsilon,
        global_fit_K=fit_K,
        medium=medium,
        bias_causes=bias_causes(inputs, ex.layout, medium),
    )


def _global_fit_budgets(
    inputs: PlanInputs,
    ex: BenchExperiment,
    elementary: _Inputs,
    models: _Models,
    roles: Sequence[Role],
    reading_gradient: NDArray[np.float64],
) -> tuple[Budget | None, Budget | None]:
    """First-order budgets of the global fit's eps and K, or (None, None) when not separable.

    The analyst fits the recipe's nominal totals, so every error of a stock, a delivery or a
    flask reaches the fitted parameters only through the readings it changes: with G the
    fit's gain (:func:`planner.analysis.global_fit_gain`), d theta/d z = G d A_net/d z, and
    GUM eq. 10 (JCGM 100:2008) over the same elementary inputs as the all-bound budgets; the
    inputs shared by several mixtures (a stock, a device's systematic error, the blank) carry
    their correlation. On noise-free readings the fit returns the plan's eps and K exactly, so
    the first-order estimate is those values.
    """
    layout = ex.layout
    gain = global_fit_gain(global_fit_jacobian(inputs.reaction, inputs.instrument, layout))
    if not np.all(np.isfinite(gain)):
        return None, None
    fit = np.concatenate([layout.standards, layout.tests])
    net = reading_gradient[fit] - reading_gradient[layout.blanks].mean(axis=0)
    theta = gain @ net  # (2, n_z): d eps/dz, d log10 K/dz
    epsilon = _budget(
        "epsilon_global_fit",
        layout.epsilon_true,
        theta[0],
        "L mol-1 cm-1",
        ex,
        elementary,
        models,
        roles,
    )
    k = _budget(
        "K_global_fit",
        layout.K_true,
        theta[1] * layout.K_true * math.log(10.0),
        "L/mol",
        ex,
        elementary,
        models,
        roles,
    )
    return epsilon, k


def _interval(value: float, u: float) -> tuple[float, float]:
    half = COVERAGE_FACTOR_95 * u
    return (value - half, value + half)


def prediction_from(result: UncertaintyResult) -> Prediction:
    """The plan's ``prediction`` block from the first-order budget.

    Parameters
    ----------
    result
        From :func:`propagate`.

    Returns
    -------
    Prediction
        eps (through the origin) and the mean K with their standard uncertainties, the bias
        of K, K per test, and the 95 % intervals (value -/+ 1.96 u) a class will likely report
        for eps, K, K per test and every mixture's reading.
    """
    return Prediction(
        epsilon=result.epsilon.value,
        u_epsilon=result.epsilon.standard_uncertainty,
        K=result.K.value,
        u_K=result.K.standard_uncertainty,
        K_bias_from_assumption=result.K_bias_from_assumption,
        K_true=result.K_true,
        epsilon_true=result.epsilon_true,
        K_per_test=tuple(k for k, _ in result.K_per_test),
        u_K_per_test=tuple(u for _, u in result.K_per_test),
        epsilon_intercept=result.epsilon_intercept.value,
        u_epsilon_intercept=result.epsilon_intercept.standard_uncertainty,
        epsilon_ci95=result.epsilon.ci95,
        K_ci95=result.K.ci95,
        K_per_test_ci95=tuple(_interval(k, u) for k, u in result.K_per_test),
        absorbance_ci95={m.id: m.absorbance_ci95 for m in result.mixtures},
        K_bias_causes=result.bias_causes,
    )


def global_fit_prediction_from(result: UncertaintyResult) -> GlobalFitPrediction | None:
    """What the global fit will report, from the first-order budget; None when eps and K
    cannot be separated on this plan."""
    if result.global_fit_K is None or result.global_fit_epsilon is None:
        return None
    return GlobalFitPrediction(
        epsilon=result.global_fit_epsilon.value,
        u_epsilon=result.global_fit_epsilon.standard_uncertainty,
        K=result.global_fit_K.value,
        u_K=result.global_fit_K.standard_uncertainty,
    )
