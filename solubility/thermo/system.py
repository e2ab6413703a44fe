"""The pycalphad adapter: the one module that touches pycalphad's internals.

pycalphad's low-level API (models, ``PhaseRecordFactory``, compiled ``PhaseRecord`` callbacks) moves between
minor releases, so it is wrapped here once. Everything above this module sees a `ThermoSystem`: for one database,
set of elements, set of phases and pressure it holds the compiled Gibbs energy functions of every phase and
answers four questions fast and exactly:

* the Gibbs energy of a phase per mole of formula units, with gradient and Hessian in the site fractions;
* the chemical potentials of the elements in a phase of given constitution (its tangent hyperplane);
* the driving force of a phase against given chemical potentials (the phase's constitution is optimised);
* a screening of every phase against given chemical potentials on a fixed sample of constitutions.

Conventions: temperatures in K, pressure in Pa, energies in J/mol. Gibbs energies are per mole of formula units
of the phase unless a name says "per atom" (J per mole of atoms). The driving force of a phase is
``max_y (mu . x(y) - G_m(y))`` per mole of atoms: positive means the phase would lower the Gibbs energy by
forming, so it is more stable than the reference state that set the chemical potentials.

Compiled systems are cached per process by (database sha256, elements, phases, pressure): building one costs
hundreds of milliseconds to seconds (code generation); evaluating a phase afterwards costs microseconds.
"""

from __future__ import annotations

import contextlib
import functools
import itertools
import threading
from collections.abc import Callable, Iterator, Sequence
from dataclasses import dataclass, field

import numpy as np

from solubility.errors import DatabaseError

__all__ = [
    "DrivingForce",
    "PhaseFunctions",
    "ThermoSystem",
    "checked_expressions",
    "filter_candidate_phases",
    "get_system",
]

#: smallest site fraction used anywhere (pycalphad's own floor is 1e-14; we go below it on purpose)
Y_FLOOR = 1e-300


@dataclass(frozen=True)
class DrivingForce:
    """Driving force of one phase against given chemical potentials.

    Attributes
    ----------
    phase
        Phase name.
    value
        ``max_y (mu . x(y) - G_m(y))``, J per mole of atoms; > 0 means the phase is more stable.
    y
        Site fractions at the optimum, in the phase's variable order.
    x
        Mole fractions of the elements at the optimum (ThermoSystem.elements order).
    converged
        False if the constitution optimisation did not converge.
    """

    phase: str
    value: float
    y: np.ndarray
    x: np.ndarray
    converged: bool


@dataclass
class PhaseFunctions:
    """Compiled functions and sublattice bookkeeping for one phase."""

    name: str
    record: object  # pycalphad PhaseRecord
    species: tuple[str, ...]  # constituent name of each site-fraction variable
    sublattice_of: np.ndarray  # (ny,) sublattice index of each variable
    site_ratios: tuple[float, ...]
    moles: np.ndarray  # (n_el, ny): moles of each element per formula unit = moles @ y (linear in y)
    samples: np.ndarray = field(repr=False)  # (n_pts, ny) sample constitutions for screening
    sample_x: np.ndarray = field(repr=False)  # (n_pts, n_el) mole fractions of the samples
    groups: tuple[np.ndarray, ...] = field(default=(), repr=False)  # variable indices of each sublattice
    tangent: np.ndarray | None = field(default=None, repr=False)  # constant part of the tangent-plane matrix
    _bases: dict = field(default_factory=dict, repr=False)  # pivot choice -> reduced basis

    def reduced_basis(self, y: np.ndarray) -> np.ndarray:
        """Columns e_j - e_pivot for each non-pivot variable j (pivot: the largest fraction of its sublattice)."""
        pivots = tuple(int(idx[np.argmax(y[idx])]) for idx in self.groups if idx.size > 1)
        Z = self._bases.get(pivots)
        if Z is None:
            cols = []
            for idx, pivot in zip((g for g in self.groups if g.size > 1), pivots, strict=True):
                for j in idx:
                    if j != pivot:
                        col = np.zeros(self.ny)
                        col[j], col[pivot] = 1.0, -1.0
                        cols.append(col)
            Z = np.array(cols).T if cols else np.zeros((self.ny, 0))
            self._bases[pivots] = Z
        return Z

    @property
    def atoms(self) -> np.ndarray:
        """(ny,) atoms per formula unit contributed by each site fraction (n(y) = atoms @ y)."""
        return self.moles.sum(axis=0)

    @property
    def ny(self) -> int:
        return len(self.species)

    @property
    def n_sublattices(self) -> int:
        return len(self.site_ratios)

    @property
    def stoichiometric(self) -> bool:
        return self.ny == self.n_sublattices


def filter_candidate_phases(db, elements: Sequence[str], phases: Sequence[str] | None = None) -> list[str]:
    """Phases of `db` that can form from `elements` (plus VA), as pycalphad's own filter decides."""
    from pycalphad.core.utils import filter_phases, unpack_species

    comps = [*elements, "VA"]
    species = unpack_species(db, comps)
    return sorted(filter_phases(db, species, phases))


class ThermoSystem:
    """Compiled thermodynamics of one (database, elements, phases, pressure).

    Parameters
    ----------
    db
        A pycalphad Database.
    elements
        The elements (VA is added automatically and never counted as an element).
    phases
        Phase names; each must be able to form from `elements`.
    pressure
        Pa.
    """

    def __init__(self, db, elements: Sequence[str], phases: Sequence[str], pressure: float) -> None:
        from pycalphad import variables as v
        from pycalphad.codegen.phase_record_factory import PhaseRecordFactory
        from pycalphad.core.utils import instantiate_models

        self.pressure = float(pressure)
        comps = sorted({*elements, "VA"})
        try:
            models = instantiate_models(db, comps, list(phases), model=_exact_mixing_model())
            self._prf = PhaseRecordFactory(db, comps, {v.N, v.P, v.T}, models)
        except Exception as exc:  # pycalphad raises a variety of errors for inconsistent databases
            raise DatabaseError(f"pycalphad could not build models for phases {sorted(phases)}: {exc}") from exc
        self.elements: tuple[str, ...] = tuple(self._prf.nonvacant_elements)
        self.molar_masses = np.asarray(self._prf.molar_masses, dtype=float)  # g/mol, elements order
        self._models = models
        self.phases: dict[str, PhaseFunctions] = {}
        for name in phases:
            self.phases[name] = self._phase_functions(name, models[name])
        self._lock = threading.Lock()

    # ------------------------------------------------------------------ construction helpers
    def _phase_functions(self, name: str, model) -> PhaseFunctions:
        record = self._prf[name]
        state = [str(s) for s in record.state_variables]
        if state != ["N", "P", "T"]:  # pragma: no cover - guards against an API change in pycalphad
            raise DatabaseError(f"unexpected state variables {state} for phase {name}")
        variables = list(record.variables)
        species = tuple(str(var.species.name) for var in variables)
        sublattice_of = np.array([int(var.sublattice_index) for var in variables], dtype=int)
        ny = len(variables)
        elements = list(self._prf.nonvacant_elements)
        moles = np.zeros((len(elements), ny))
        for j, var in enumerate(variables):  # site ratio times the species' stoichiometry
            ratio = float(model.site_ratios[int(var.sublattice_index)])
            for el, count in var.species.constituents.items():
                if el in elements:
                    moles[elements.index(el), j] += ratio * float(count)
        samples = _sample_constitutions(sublattice_of, ny)
        sx = samples @ moles.T
        with np.errstate(invalid="ignore", divide="ignore"):
            sx = sx / sx.sum(axis=1, keepdims=True)
        keep = np.all(np.isfinite(sx), axis=1)
        n_el, ns = moles.shape[0], int(sublattice_of.max()) + 1
        tangent = np.zeros((ny + 1, n_el + ns))
        tangent[:ny, :n_el] = moles.T
        tangent[np.arange(ny), n_el + sublattice_of] = 1.0
        return PhaseFunctions(
            name=name,
            record=record,
            species=species,
            sublattice_of=sublattice_of,
            site_ratios=tuple(float(r) for r in model.site_ratios),
            moles=moles,
            samples=samples[keep],
            sample_x=sx[keep],
            groups=tuple(np.flatnonzero(sublattice_of == k) for k in range(ns)),
            tangent=tangent,
        )

    def _dof(self, y: np.ndarray, T: float) -> np.ndarray:
        return np.concatenate(([1.0, self.pressure, float(T)], y))

    # ------------------------------------------------------------------ energies
    def gibbs(self, phase: str, y: np.ndarray, T: float) -> float:
        """Gibbs energy of `phase` at site fractions `y`, J per mole of formula units."""
        out = np.zeros(1)
        self.phases[phase].record.formulaobj(out, self._dof(y, T))
        return float(out[0])

    def gibbs_derivatives(self, phase: str, y: np.ndarray, T: float) -> tuple[float, np.ndarray, np.ndarray]:
        """Gibbs energy per formula unit with its gradient and Hessian in the site fractions."""
        pf = self.phases[phase]
        dof = self._dof(y, T)
        out = np.zeros(1)
        grad = np.zeros(dof.size)
        hess = np.zeros((dof.size, dof.size))
        # the formula-unit functions pycalphad's own solver compiles and uses
        pf.record.formulaobj(out, dof)
        pf.record.formulagrad(grad, dof)
        pf.record.formulahess(hess, dof)
        return float(out[0]), grad[3:], hess[3:, 3:]

    def gibbs_per_atom_samples(self, phase: str, T: float) -> np.ndarray:
        """Molar Gibbs energy (J per mole of atoms) of every sample constitution of `phase` at `T`."""
        pf = self.phases[phase]
        n = pf.samples.shape[0]
        dof = np.empty((n, 3 + pf.ny))
        dof[:, 0] = 1.0
        dof[:, 1] = self.pressure
        dof[:, 2] = T
        dof[:, 3:] = pf.samples
        out = np.zeros(n)
        pf.record.obj_2d(out, dof)
        return out

    # ------------------------------------------------------------------ chemical potentials
    def chemical_potentials(self, phase: str, y: np.ndarray, T: float) -> tuple[np.ndarray, float]:
        """Chemical potentials (J/mol, elements order) of the tangent hyperplane of `phase` at `y`.

        Solves ``dG/dy_j = sum_i mu_i dN_i/dy_j + lambda_s(j)`` for every site fraction together with
        ``G = sum_i N_i mu_i`` (G and N per formula unit), which determines mu uniquely for a phase whose
        constitution is fixed by its composition (no internal degrees of freedom), such as (M)a(X,VA)c.

        Returns
        -------
        mu, residual
            The potentials and the relative residual of the (least-squares) solve; a residual above about 1e-9
            means the phase has internal degrees of freedom that the composition does not fix.
        """
        pf = self.phases[phase]
        dof = self._dof(y, T)
        out = np.zeros(1)
        grad = np.zeros(dof.size)
        pf.record.formulaobj(out, dof)
        pf.record.formulagrad(grad, dof)
        g_f = float(out[0])
        grad_f = grad[3:]
        n_el, ny = len(self.elements), pf.ny
        mat = pf.tangent.copy()
        mat[ny, :n_el] = pf.moles @ y
        rhs = np.empty(ny + 1)
        rhs[:ny] = grad_f
        rhs[ny] = g_f
        if mat.shape[0] == mat.shape[1]:
            try:
                sol = np.linalg.solve(mat, rhs)
            except np.linalg.LinAlgError:
                sol = np.linalg.lstsq(mat, rhs, rcond=None)[0]
        else:
            sol = np.linalg.lstsq(mat, rhs, rcond=None)[0]
        scale = max(1.0, float(np.max(np.abs(rhs))))
        residual = float(np.max(np.abs(mat @ sol - rhs))) / scale
        return sol[:n_el], residual

    # ------------------------------------------------------------------ driving forces
    def screen(self, mu: np.ndarray, T: float, phases: Sequence[str]) -> dict[str, tuple[float, np.ndarray]]:
        """Best sampled driving force (J per mole of atoms) and its constitution, for each phase."""
        result = {}
        for name in phases:
            pf = self.phases[name]
            gm = self.gibbs_per_atom_samples(name, T)
            df = pf.sample_x @ mu - gm
            df[~np.isfinite(df)] = -np.inf
            k = int(np.argmax(df))
            result[name] = (float(df[k]), pf.samples[k].copy())
        return result

    def driving_force(self, phase: str, mu: np.ndarray, T: float, y0: np.ndarray) -> DrivingForce:
        """Driving force of `phase` against `mu`, optimising its constitution from the start `y0`.

        Maximises ``psi(y) = mu . N(y) - G(y)`` (per formula unit) over the product of simplices by a reduced
        Newton method with a fraction-to-boundary rule, then reports ``psi / (atoms per formula unit)``.
        """
        pf = self.phases[phase]
        y = np.clip(np.asarray(y0, dtype=float), Y_FLOOR, 1.0)
        y = _normalise(y, pf.sublattice_of, pf.n_sublattices)
        converged = True
        if not pf.stoichiometric:
            y, converged = self._maximise_psi(pf, mu, T, y)
        g = self.gibbs(phase, y, T)
        n = pf.moles @ y
        atoms = float(n.sum())
        value = (float(mu @ n) - g) / atoms
        return DrivingForce(phase, value, y, n / atoms, converged)

    def _maximise_psi(self, pf: PhaseFunctions, mu: np.ndarray, T: float, y: np.ndarray):
        """Maximise phi(y) = (mu . N(y) - G(y)) / n(y), the driving force per mole of atoms."""
        dn = pf.moles.sum(axis=0)  # atoms per formula unit is dn @ y (linear)
        mu_n = pf.moles.T @ mu
        phi = self._phi(pf, mu_n, dn, y, T)
        for _ in range(200):
            g, grad, hess = self.gibbs_derivatives(pf.name, y, T)
            n = float(dn @ y)
            phi = (float(mu_n @ y) - g) / n
            gphi = (mu_n - grad - phi * dn) / n
            hphi = (-hess - np.outer(gphi, dn) - np.outer(dn, gphi)) / n
            Z = pf.reduced_basis(y)
            rg = Z.T @ gphi
            rh = Z.T @ hphi @ Z
            d, shift = _ascent_step(rg, rh)
            step = Z @ d
            alpha = _fraction_to_boundary(y, step)
            if (
                shift == 0.0
                and alpha == 1.0
                and float(-rg @ d) < 1e-10  # Newton decrement: phi within 1e-10 J/mol of its maximum
                and float(np.max(np.abs(step) / np.maximum(y, Y_FLOOR))) < 1e-6  # in the quadratic regime
            ):
                return _normalise(np.maximum(y + step, Y_FLOOR), pf.sublattice_of, pf.n_sublattices), True
            for _ls in range(40):
                y_new = _normalise(np.maximum(y + alpha * step, Y_FLOOR), pf.sublattice_of, pf.n_sublattices)
                phi_new = self._phi(pf, mu_n, dn, y_new, T)
                if phi_new >= phi - 1e-13 * max(1.0, abs(phi)):
                    break
                alpha *= 0.5
            else:  # no ascent possible at double precision: converged if the gradient is tiny
                return y, bool(np.max(np.abs(rg)) < 1e-6 * max(1.0, abs(phi)))
            rel = float(np.max(np.abs(y_new - y) / np.maximum(y, Y_FLOOR)))
            y = y_new
            if rel < 1e-12:
                return y, True
        return y, False

    def _phi(self, pf: PhaseFunctions, mu_n: np.ndarray, dn: np.ndarray, y: np.ndarray, T: float) -> float:
        return (float(mu_n @ y) - self.gibbs(pf.name, y, T)) / float(dn @ y)


@functools.cache
def _exact_mixing_model():
    """pycalphad's Model with the ideal mixing term kept for every site fraction > 0.

    pycalphad drops ``y ln y`` below y = 1e-15 (a Piecewise cut that keeps its own solver well behaved), which
    would flatten the chemical potential of a solute more dilute than that. This solver never evaluates a site
    fraction of exactly zero, so the plain term is exact here.
    """
    from pycalphad import Model
    from pycalphad import variables as v
    from pycalphad.model import _extend_ordered_if_subset_of_disorder
    from symengine import S, log

    class ExactMixingModel(Model):
        def ideal_mixing_energy(self, dbe):
            phase = dbe.phases[self.phase_name]
            if phase.model_hints.get("ordered_phase", False):
                phase = _extend_ordered_if_subset_of_disorder(dbe, self.components, phase)
            term = S.Zero
            for index, sublattice in enumerate(phase.constituents):
                ratio = self.site_ratios[index]
                for comp in set(sublattice).intersection(self.components):
                    y = v.SiteFraction(phase.name, index, comp)
                    term += ratio * y * log(y)
            return v.R * v.T * term / self._site_ratio_normalization

    return ExactMixingModel


# ---------------------------------------------------------------------- small numerical helpers
def _normalise(y: np.ndarray, sublattice_of: np.ndarray, ns: int) -> np.ndarray:
    sums = np.bincount(sublattice_of, weights=y, minlength=ns)
    return y / sums[sublattice_of]


def _ascent_step(rg: np.ndarray, rh: np.ndarray) -> tuple[np.ndarray, float]:
    """Newton ascent step d solving rh d = -rg; where rh is not negative definite its spectrum is shifted.

    Returns the step and the shift applied (0 for a plain Newton step).
    """
    if rg.size == 1:
        h = float(rh[0, 0])
        if h < 0:
            return np.array([-rg[0] / h]), 0.0
        shift = h + 1e-8 * max(1.0, abs(h))
        return np.array([-rg[0] / (h - shift)]), shift
    try:
        L = np.linalg.cholesky(-rh)
        return np.linalg.solve(L.T, np.linalg.solve(L, rg)), 0.0
    except np.linalg.LinAlgError:
        w, V = np.linalg.eigh(rh)
        shift = float(w.max()) + 1e-8 * max(1.0, float(np.abs(w).max()))
        return -V @ ((V.T @ rg) / (w - shift)), shift


def _fraction_to_boundary(y: np.ndarray, step: np.ndarray, keep: float = 1e-3) -> float:
    """Largest alpha <= 1 such that every fraction keeps at least `keep` of its value."""
    neg = step < 0
    if not np.any(neg):
        return 1.0
    limits = (1.0 - keep) * y[neg] / (-step[neg])
    return float(min(1.0, limits.min()))


def _simplex_points(k: int) -> np.ndarray:
    """Sample points on the (k-1)-simplex: vertices, log-spaced dilute edges and an interior lattice."""
    if k == 1:
        return np.ones((1, 1))
    dilute = np.logspace(-12, -1, 23)
    t = np.unique(np.concatenate((dilute, np.linspace(0.0, 1.0, 41)[1:-1], 1.0 - dilute)))
    pts = []
    for i, j in itertools.combinations(range(k), 2):
        edge = np.zeros((t.size, k))
        edge[:, i] = t
        edge[:, j] = 1.0 - t
        pts.append(edge)
    if k >= 3:
        rng = np.random.default_rng(20261201)
        pts.append(rng.dirichlet(np.full(k, 0.7), size=60 * k))
    out = np.concatenate(pts)
    return np.clip(out, 1e-14, 1.0)


def _sample_constitutions(sublattice_of: np.ndarray, ny: int, cap: int = 4000) -> np.ndarray:
    """A fixed (seeded) sample of constitutions: the product of per-sublattice simplex samples, capped."""
    ns = int(sublattice_of.max()) + 1 if ny else 0
    per_sub = [_simplex_points(int(np.sum(sublattice_of == s))) for s in range(ns)]
    sizes = [p.shape[0] for p in per_sub]
    total = int(np.prod(sizes))
    if total <= cap:
        combos = np.array(list(itertools.product(*[range(n) for n in sizes])))
    else:
        rng = np.random.default_rng(12345)
        combos = np.column_stack([rng.integers(0, n, size=cap) for n in sizes])
    y = np.zeros((combos.shape[0], ny))
    for s, pts in enumerate(per_sub):
        idx = np.flatnonzero(sublattice_of == s)
        y[:, idx] = pts[combos[:, s]]
    return y


# ---------------------------------------------------------------------- per-process cache
_CACHE: dict[tuple, ThermoSystem] = {}
_PARSE_LOCK = threading.Lock()
_CACHE_LOCK = threading.Lock()


def get_system(db, db_key: str, elements: Sequence[str], phases: Sequence[str], pressure: float) -> ThermoSystem:
    """The cached `ThermoSystem` for (db_key, elements, phases, pressure), built on first use.

    Parameters
    ----------
    db
        pycalphad Database.
    db_key
        A stable identity of the database's content (its sha256), so equal files share one system.
    """
    key = (db_key, tuple(sorted(elements)), tuple(sorted(phases)), float(pressure))
    with _CACHE_LOCK:
        system = _CACHE.get(key)
        if system is None:
            system = ThermoSystem(db, sorted(elements), sorted(phases), pressure)
            _CACHE[key] = system
    return system


@contextlib.contextmanager
def checked_expressions(check: Callable[[str], None]) -> Iterator[None]:
    """While pycalphad parses, run `check` on every string its reader hands to SymEngine.

    Defence in depth behind `solubility.databases.guard.guard_tdb_text`, which finds the expressions by reading the
    text itself: here the reader's own expression function (``pycalphad.io.tdb._sympify_string`` in 0.11.2) is
    wrapped, under a lock, for the duration of one parse. Where that private function is missing (another
    pycalphad version), only the text guard applies.
    """
    try:
        from pycalphad.io import tdb as tdb_module

        original = tdb_module._sympify_string
    except (ImportError, AttributeError):
        yield
        return

    def guarded(math_string: str) -> object:
        check(math_string)
        return original(math_string)

    with _PARSE_LOCK:
        tdb_module._sympify_string = guarded
        try:
            yield
        finally:
            tdb_module._sympify_string = original

