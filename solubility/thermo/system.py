"""The pycalphad adapter: the one module that touches pycalphad's internals.

pycalphad's low-level API (models, ``PhaseRecordFactory``, compiled ``PhaseRecord`` callbacks) moves between
minor releases, so it is wrapped here once. A `CompiledSystem` holds, for one database content, set of elements,
set of phases and set of free model parameters, the compiled Gibbs energy functions of every phase. Pressure and
the parameters' values are runtime inputs of those functions (pycalphad's state variables are N, P, T; free
parameters are appended to the inputs), so `CompiledSystem.bind` gives, without compiling anything, a
`BoundSystem` at one pressure and one set of parameter values that answers four questions fast and exactly:

* the Gibbs energy of a phase per mole of formula units, with gradient and Hessian in the site fractions;
* the chemical potentials of the elements in a phase of given constitution (its tangent hyperplane);
* the driving force of a phase against given chemical potentials (the phase's constitution is optimised);
* a screening of every phase against given chemical potentials on a fixed sample of constitutions.

Conventions: temperatures in K, pressure in Pa, energies in J/mol. Gibbs energies are per mole of formula units
of the phase unless a name says "per atom" (J per mole of atoms). The driving force of a phase is
``max_y (mu . x(y) - G_m(y))`` per mole of atoms: positive means the phase would lower the Gibbs energy by
forming, so it is more stable than the reference state that set the chemical potentials.

Compiled systems are cached per process by the content of what they compile (`solubility.thermo.cache`).
Building one costs hundreds of milliseconds to seconds (code generation); evaluating a phase afterwards costs
microseconds.
"""

from __future__ import annotations

import functools
from collections.abc import Mapping, Sequence

import numpy as np

from solubility.errors import DatabaseError, InputError
from solubility.thermo.optimise import Y_FLOOR, maximise_phi, normalise
from solubility.thermo.phases import DrivingForce, PhaseFunctions, best_of_runs, phase_functions, stack_samples

__all__ = [
    "BoundSystem",
    "CompiledSystem",
    "DrivingForce",
    "PhaseFunctions",
    "filter_candidate_phases",
]


def filter_candidate_phases(db, elements: Sequence[str], phases: Sequence[str] | None = None) -> list[str]:
    """Phases of `db` that can form from `elements` (plus VA), as pycalphad's own filter decides."""
    from pycalphad.core.utils import filter_phases, unpack_species

    comps = [*elements, "VA"]
    species = unpack_species(db, comps)
    return sorted(filter_phases(db, species, phases))


class CompiledSystem:
    """Compiled thermodynamics of one (database, elements, phases, free parameters); bind it to evaluate.

    Parameters
    ----------
    db
        A pycalphad Database.
    elements
        The elements (VA is added automatically and never counted as an element).
    phases
        Phase names; each must be able to form from `elements`.
    parameters
        Names of database symbols left free at compile time (for example a FUNCTION or an undefined symbol used in
        a parameter expression); their values are given to `bind`.
    """

    def __init__(self, db, elements: Sequence[str], phases: Sequence[str], parameters: Sequence[str] = ()) -> None:
        from pycalphad import variables as v
        from pycalphad.codegen.phase_record_factory import PhaseRecordFactory
        from pycalphad.core.utils import instantiate_models

        from solubility.thermo.checks import undefined_functions

        comps = sorted({*elements, "VA"})
        names = sorted({str(p) for p in parameters})
        start = dict.fromkeys(names, 0.0)
        if names:
            _check_parameter_names(db, phases, names)
        try:
            models = instantiate_models(db, comps, list(phases), model=_exact_mixing_model(), parameters=start,
                                        symbols_only=True)
            self._prf = PhaseRecordFactory(db, comps, {v.N, v.P, v.T}, models, parameters=start)
        except Exception as exc:  # pycalphad raises a variety of errors for inconsistent databases
            raise DatabaseError(f"pycalphad could not build models for phases {sorted(phases)}: {exc}") from exc
        if names:  # a symbol of the database that no chosen phase uses
            used = {str(sym) for m in models.values() for sym in m.GM.free_symbols}
            unused = [n for n in names if n not in used]
            if unused:
                raise InputError(f"parameter {', '.join(unused)} appears in no Gibbs energy of the phases "
                                 f"{', '.join(sorted(phases))}; give symbols that their parameters use")
        #: names of the free parameters, in the order pycalphad appends their values to the inputs
        self.parameter_names: tuple[str, ...] = tuple(str(s) for s in self._prf.param_symbols)
        self.elements: tuple[str, ...] = tuple(self._prf.nonvacant_elements)
        self.molar_masses = np.asarray(self._prf.molar_masses, dtype=float)  # g/mol, elements order
        self._models = models
        #: phase -> symbols its Gibbs energy uses that the database never defines (pycalphad takes them as zero)
        self.undefined: dict[str, list[str]] = {
            p: [u for u in us if u not in names] for p, us in undefined_functions(models).items()
            if any(u not in names for u in us)}
        self.phases: dict[str, PhaseFunctions] = {}
        for name in phases:
            self.phases[name] = phase_functions(self._prf[name], models[name], self.elements)

    def bind(self, pressure: float, parameters: Mapping[str, float] | None = None) -> BoundSystem:
        """The system at `pressure` (Pa) and the free parameters at `parameters` (name -> value); no compiling.

        Raises
        ------
        InputError
            A parameter is missing, unknown, or not a finite number.
        """
        given = {str(k): v for k, v in (parameters or {}).items()}
        unknown = sorted(set(given) - set(self.parameter_names))
        missing = [n for n in self.parameter_names if n not in given]
        if unknown or missing:
            raise InputError(f"parameter values for {', '.join(unknown)} are given but those are not free "
                             f"parameters of this system ({', '.join(self.parameter_names) or 'none'})" if unknown
                             else f"parameter {', '.join(missing)} needs a value")
        values = np.array([float(given[n]) for n in self.parameter_names], dtype=float)
        if not np.all(np.isfinite(values)):
            raise InputError(f"parameter values {given} must be finite numbers")
        return BoundSystem(self, float(pressure), values)

    def _records_with(self, values: np.ndarray) -> dict[str, object]:
        """Phase records evaluating with the parameter `values` (their own copies when there are parameters)."""
        if not self.parameter_names:
            return {name: pf.record for name, pf in self.phases.items()}
        from pycalphad.core.phase_rec import PhaseRecord

        records = {}
        for name in self.phases:
            rec = PhaseRecord(self._prf, name)  # reuses the factory's compiled functions (about 0.1 ms)
            rec.parameters = values
            records[name] = rec
        return records


def _check_parameter_names(db, phases: Sequence[str], names: Sequence[str]) -> None:
    """Refuse names that are neither a symbol (FUNCTION) of `db` nor a free symbol of a parameter of `phases`."""
    known = {str(k) for k in db.symbols}
    for p in db._parameters.all():
        if p["phase_name"] in phases:
            known.update(str(sym) for sym in getattr(p["parameter"], "free_symbols", ()))
    unknown = [n for n in names if n not in known]
    if unknown:
        raise InputError(f"parameter {', '.join(unknown)} is neither a FUNCTION of the database nor a symbol in "
                         f"a parameter of {', '.join(sorted(phases))}")


class BoundSystem:
    """A `CompiledSystem` at one pressure and one set of parameter values (share it freely; it is read-only).

    Attributes
    ----------
    compiled
        The compiled system.
    pressure
        Pa.
    parameters
        Free parameter name -> value.
    elements, molar_masses, phases
        As in the compiled system (molar masses in g/mol).
    """

    def __init__(self, compiled: CompiledSystem, pressure: float, values: np.ndarray) -> None:
        self.compiled = compiled
        self.pressure = float(pressure)
        self._values = np.ascontiguousarray(values, dtype=float)
        self.parameters: dict[str, float] = dict(zip(compiled.parameter_names, map(float, values), strict=True))
        self.elements = compiled.elements
        self.molar_masses = compiled.molar_masses
        self.phases = compiled.phases
        self._records = compiled._records_with(self._values)
        #: (T, {phase: Gibbs energies of its samples}): the samples' energies at the last temperature asked for,
        #: shared by every screening at that temperature (a line of points screens many times at each T)
        self._sampled: tuple[float, dict] = (float("nan"), {})
        self._stacks: dict[tuple[str, ...], tuple[np.ndarray, np.ndarray]] = {}

    def _dof(self, y: np.ndarray, T: float) -> np.ndarray:
        return np.concatenate(([1.0, self.pressure, float(T)], y))

    # ------------------------------------------------------------------ energies
    def gibbs(self, phase: str, y: np.ndarray, T: float) -> float:
        """Gibbs energy of `phase` at site fractions `y`, J per mole of formula units."""
        out = np.zeros(1)
        self._records[phase].formulaobj(out, self._dof(y, T))
        return float(out[0])

    def gibbs_derivatives(self, phase: str, y: np.ndarray, T: float) -> tuple[float, np.ndarray, np.ndarray]:
        """Gibbs energy per formula unit with its gradient and Hessian in the site fractions."""
        record = self._records[phase]
        dof = self._dof(y, T)
        out = np.zeros(1)
        grad = np.zeros(dof.size)
        hess = np.zeros((dof.size, dof.size))
        # the formula-unit functions pycalphad's own solver compiles and uses
        record.formulaobj(out, dof)
        record.formulagrad(grad, dof)
        record.formulahess(hess, dof)
        return float(out[0]), grad[3:], hess[3:, 3:]

    def gibbs_per_atom_samples(self, phase: str, T: float) -> np.ndarray:
        """Molar Gibbs energy (J per mole of atoms) of every sample constitution of `phase` at `T` (read-only;
        kept for the last temperature asked for)."""
        T = float(T)
        cached_T, cache = self._sampled  # one read: another thread may swap the tuple, never mutate ours
        if cached_T != T:
            cache = {}
            self._sampled = (T, cache)
        out = cache.get(phase)
        if out is None:
            out = self._sample_energies(phase, T)
            out.setflags(write=False)
            cache[phase] = out
        return out

    def sampled_driving_forces(self, mu: np.ndarray, T: float, phases: Sequence[str]) -> tuple[np.ndarray, np.ndarray]:
        """Driving forces (J per mole of atoms) of every sample of `phases` against `mu` at T, in one array.

        Returns
        -------
        df, starts
            The samples' driving forces, phase after phase in the order given, and where each phase's run begins
            (``starts[i]:starts[i + 1]``, the last running to the end).
        """
        key, T = tuple(phases), float(T)
        cached_T, cache = self._sampled
        energies = cache.get(key) if cached_T == T else None
        if energies is None:  # (the per-phase energies below refresh the cache to T)
            energies = np.concatenate([self.gibbs_per_atom_samples(p, T) for p in key])
            self._sampled[1][key] = energies
        x, starts = self._stack(key)
        return x @ mu - energies, starts

    def _stack(self, key: tuple[str, ...]) -> tuple[np.ndarray, np.ndarray]:
        if key not in self._stacks:  # `solubility.thermo.phases.stack_samples` of the phases `key`, kept
            self._stacks[key] = stack_samples([self.phases[p] for p in key])
        return self._stacks[key]

    def _sample_energies(self, phase: str, T: float) -> np.ndarray:
        pf = self.phases[phase]
        n = pf.samples.shape[0]
        dof = np.empty((n, 3 + pf.ny))
        dof[:, 0] = 1.0
        dof[:, 1] = self.pressure
        dof[:, 2] = T
        dof[:, 3:] = pf.samples
        out = np.zeros(n)
        self._records[phase].obj_2d(out, dof)
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
            means the phase has internal degrees of freedom that the composition does not fix. A Gibbs energy
            that is not a finite number gives NaN potentials and a NaN residual.
        """
        pf = self.phases[phase]
        record = self._records[phase]
        dof = self._dof(y, T)
        out = np.zeros(1)
        grad = np.zeros(dof.size)
        record.formulaobj(out, dof)
        record.formulagrad(grad, dof)
        g_f = float(out[0])
        grad_f = grad[3:]
        n_el, ny = len(self.elements), pf.ny
        if not (np.isfinite(g_f) and np.all(np.isfinite(grad_f))):
            return np.full(n_el, np.nan), float("nan")
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
    def screen(self, mu: np.ndarray, T: float,
               phases: Sequence[str]) -> dict[str, tuple[float, np.ndarray, np.ndarray]]:
        """Best sampled driving force (J per mole of atoms), its constitution and its mole fractions (read-only),
        for each phase.

        A phase with any sample whose energy is not a finite number gets NaN (its driving force is unknown; the
        caller must not take it as stable or as unstable).
        """
        if not phases:
            return {}
        df, starts = self.sampled_driving_forces(mu, T, phases)
        values, best = best_of_runs(df, starts)
        return {name: (float(v), self.phases[name].samples[k].copy(), self.phases[name].sample_x[k])
                for name, v, k in zip(phases, values, best - starts, strict=True)}

    def driving_force(self, phase: str, mu: np.ndarray, T: float, y0: np.ndarray) -> DrivingForce:
        """Driving force of `phase` against `mu`, optimising its constitution from the start `y0`.

        Maximises ``phi(y) = (mu . N(y) - G(y)) / n(y)`` (per mole of atoms) over the product of simplices with
        `solubility.thermo.optimise.maximise_phi`. A value that is not a finite number is reported with
        ``converged=False``.
        """
        pf = self.phases[phase]
        y = np.clip(np.asarray(y0, dtype=float), Y_FLOOR, 1.0)
        y = normalise(y, pf.sublattice_of, pf.n_sublattices)
        converged = True
        if not pf.stoichiometric:
            y, converged = maximise_phi(
                lambda yy: self.gibbs(phase, yy, T),
                lambda yy: self.gibbs_derivatives(phase, yy, T),
                pf.moles.T @ mu, pf.atoms, y, pf.sublattice_of, basis=pf.reduced_basis,
            )
        g = self.gibbs(phase, y, T)
        n = pf.moles @ y
        atoms = float(n.sum())
        value = (float(mu @ n) - g) / atoms
        return DrivingForce(phase, value, y, n / atoms, converged and bool(np.isfinite(value)))


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
