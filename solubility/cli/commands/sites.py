"""Interstitial site families of a host structure: kind, coordination, count per host atom, hole size.

STRUCTURE is a built-in (fcc, bcc, hcp, sc, diamond) or a structure file (TOML: lattice vectors in Å and
fractional atom positions; see the README). Sites are the maxima and the cage-centre saddles of the
distance-to-nearest-atom field, so the BCC octahedral sites are found. Hard host spheres of radius R: R is
half the nearest-neighbour distance unless --host-radius is given. Without --lattice-parameter or
--host-radius a built-in has no absolute size: only ratios (r/R, d/R) are printed and the lengths are null
in --json. With --solute-radius the misfit eps = (r_solute - r)/r, the size rule (r_solute/R < 0.59, common
practice) and, with --shear-modulus (and --solute-bulk-modulus), elastic misfit energies after Eshelby are
shown: estimates from isotropic continuum elasticity, not predictions.
"""

from __future__ import annotations

import argparse
from fractions import Fraction
from typing import Any

from solubility.cli.commands._common import emit_json, positive_float

#: elementary charge, J per eV (exact in the SI since 2019)
_J_PER_EV = 1.602176634e-19


def add_arguments(parser: argparse.ArgumentParser) -> None:
    """Options of ``solubility sites``."""
    parser.add_argument(
        "structure", metavar="STRUCTURE", help="fcc, bcc, hcp, sc, diamond or a structure file"
    )
    parser.add_argument(
        "--c-over-a", type=positive_float, metavar="F", help="hcp axial ratio (default ideal)"
    )
    parser.add_argument(
        "--lattice-parameter", type=positive_float, metavar="A", help="lattice parameter a of a built-in, Å"
    )
    parser.add_argument(
        "--host-radius", type=positive_float, metavar="R", help="host radius R, Å (default: d_nn / 2)"
    )
    parser.add_argument("--solute-radius", type=positive_float, metavar="r", help="solute radius, Å")
    parser.add_argument("--shear-modulus", type=positive_float, metavar="PA", help="host shear modulus, Pa")
    parser.add_argument(
        "--solute-bulk-modulus", type=positive_float, metavar="PA", help="solute bulk modulus, Pa"
    )
    parser.add_argument("--json", action="store_true", help="print one JSON object instead of the table")


def _check_options(args: argparse.Namespace, absolute: bool) -> None:
    from solubility.errors import InputError

    moduli = args.shear_modulus is not None or args.solute_bulk_modulus is not None
    if args.solute_radius is None and moduli:
        raise InputError("--shear-modulus and --solute-bulk-modulus need --solute-radius")
    if args.solute_bulk_modulus is not None and args.shear_modulus is None:
        raise InputError("--solute-bulk-modulus needs --shear-modulus (the host's)")
    if args.solute_radius is not None and not absolute:
        raise InputError(
            f"--solute-radius {args.solute_radius:g} Å needs an absolute scale: give --lattice-parameter "
            "or --host-radius"
        )


def _misfit_dict(family: Any, args: argparse.Namespace) -> dict[str, Any] | None:
    from solubility.geometry.sites import misfit

    if args.solute_radius is None or family.radius <= 0:
        return None
    m = misfit(
        family,
        args.solute_radius,
        shear_modulus=args.shear_modulus,
        solute_bulk_modulus=args.solute_bulk_modulus,
    ).to_dict()
    for key in ("energy_rigid", "energy_compressible"):
        joules = m[f"{key}_J"]
        m[f"{key}_eV"] = None if joules is None else joules / _J_PER_EV
    m["estimate"] = "isotropic linear elasticity (Eshelby misfitting sphere): an estimate"
    if not m["within_linear_range"]:
        m["estimate"] += (f"; |eps| > {m['linear_misfit_limit']:g}, outside the range where linear elasticity is "
                          "a fair estimate: indicative only")
    return m


def _warn_outside(families: tuple, args: argparse.Namespace) -> None:
    """One warning line on standard error when any misfit lies outside the linear-elastic range."""
    import sys

    from solubility.geometry.sites import LINEAR_MISFIT_LIMIT

    if args.solute_radius is None or args.shear_modulus is None:
        return
    outside = [(k, m) for k, m in ((k, _misfit_dict(f, args)) for k, f in enumerate(families, start=1))
               if m is not None and not m["within_linear_range"]]
    if outside:
        worst = max(abs(m["eps"]) for _, m in outside)
        print(f"warning: misfit |eps| up to {worst:.3g} in site famil{'ies' if len(outside) > 1 else 'y'} "
              f"{', '.join(str(k) for k, _ in outside)} exceeds {LINEAR_MISFIT_LIMIT:g}, where linear elasticity "
              "is a fair estimate; the elastic energies there are indicative only and may misorder the sites",
              file=sys.stderr)


def _family_dict(family: Any, R: float, absolute: bool, args: argparse.Namespace) -> dict[str, Any]:
    def length(x: float) -> float | None:
        return x if absolute else None

    return {
        "kind": family.kind,
        "coordination": int(family.coordination),
        "per_host_atom": float(family.per_host_atom),
        "per_cell": int(family.per_cell),
        "radius_ratio": float(family.radius_ratio),
        "radius": length(float(family.radius)),
        "neighbour_distances": [float(d) for d in family.neighbour_distances] if absolute else None,
        "neighbour_distance_ratios": [float(d) / R for d in family.neighbour_distances],
        "neighbour_shells": [
            {"distance": length(d), "distance_over_R": d / R, "count": n} for d, n in family.neighbour_shells
        ],
        "neighbour_species": list(family.neighbour_species),
        "critical_point": family.critical_point,
        "distorted": bool(family.distorted),
        "positions": [[float(x) for x in p] for p in family.positions],
        "misfit": _misfit_dict(family, args),
    }


def _fraction(x: float) -> str:
    return str(Fraction(x).limit_denominator(1000))


def _shell_species(family: Any) -> list[str]:
    """Species of each neighbour shell, e.g. "2A+2B"."""
    out, start = [], 0
    for _, n in family.neighbour_shells:
        names = list(family.neighbour_species[start : start + n])
        start += n
        out.append("+".join(f"{names.count(s)}{s}" for s in sorted(set(names))))
    return out


def _table(structure: Any, families: tuple, args: argparse.Namespace) -> str:
    absolute = structure.absolute_scale
    R = structure.host_radius
    origin = "given" if structure.given_host_radius is not None else "half the nearest-neighbour distance"
    size = f"R = {R:.4f} Å ({origin})" if absolute else "no absolute scale (lengths shown as d/R)"
    lines = [f"{structure.name}: {structure.atoms_per_cell} host atoms per cell, {size}", ""]
    unit = "Å" if absolute else "d/R"
    head = f"{'#':>2}  {'kind':<21} {'CN':>3}  {'per atom':>8}  {'per cell':>8}  {'r/R':>9}  {'r (Å)':>8}  "
    lines.append(head + f"{'point':<8} neighbour shells ({unit})")
    several_species = len(set(structure.species)) > 1
    for k, f in enumerate(families, start=1):
        shells = ", ".join(
            f"{n} x {(d if absolute else d / R):.4f}" + (f" {species}" if several_species else "")
            for (d, n), species in zip(f.neighbour_shells, _shell_species(f), strict=True)
        )
        radius = f"{f.radius:8.4f}" if absolute else f"{'-':>8}"
        lines.append(
            f"{k:>2}  {f.kind:<21} {f.coordination:>3}  {_fraction(f.per_host_atom):>8}  {f.per_cell:>8}  "
            f"{f.radius_ratio:9.6f}  {radius}  {f.critical_point:<8} {shells}"
            + ("  (distorted)" if f.distorted else "")
        )
    lines.append("")
    lines.append("one position of each family (fractional, conventional cell):")
    for k, f in enumerate(families, start=1):
        lines.append(f"{k:>2}  ({', '.join(f'{x:.6g}' for x in f.positions[0])})")
    if args.solute_radius is not None:
        lines += ["", f"solute radius {args.solute_radius:g} Å (estimates; isotropic elasticity, Eshelby):"]
        for k, f in enumerate(families, start=1):
            m = _misfit_dict(f, args)
            if m is None:
                continue
            text = f"{k:>2}  eps = {m['eps']:+.4f}, r_solute/R = {m['size_ratio']:.4f}"
            text += " (below 0.59)" if m["fits_size_rule"] else " (not below 0.59)"
            if m["energy_rigid_eV"] is not None:
                text += f", E rigid ~ {m['energy_rigid_eV']:.3g} eV"
            if m["energy_compressible_eV"] is not None:
                text += f", E compressible ~ {m['energy_compressible_eV']:.3g} eV"
            if not m["within_linear_range"] and m["energy_rigid_eV"] is not None:
                text += f"  [|eps| > {m['linear_misfit_limit']:g}: outside linear elasticity, indicative only]"
            lines.append(text)
    if not families:
        lines.insert(3, "    (no interstitial site found)")
    return "\n".join(lines)


def run(args: argparse.Namespace) -> int:
    """Find the site families and print them (table, or one JSON object with --json)."""
    from solubility.geometry.sites import find_sites
    from solubility.geometry.structure import load_structure

    structure = load_structure(
        args.structure,
        c_over_a=args.c_over_a,
        lattice_parameter=args.lattice_parameter,
        host_radius=args.host_radius,
    )
    _check_options(args, structure.absolute_scale)
    families = find_sites(structure)
    _warn_outside(families, args)
    if args.json:
        absolute = structure.absolute_scale
        R = structure.host_radius
        emit_json(
            {
                "structure": structure.name,
                "atoms_per_cell": structure.atoms_per_cell,
                "absolute_scale": absolute,
                "host_radius": R if absolute else None,
                "lattice": structure.lattice.tolist() if absolute else None,
                "sites": [_family_dict(f, R, absolute, args) for f in families],
            }
        )
    else:
        print(_table(structure, families, args))
    return 0
