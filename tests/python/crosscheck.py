#!/usr/bin/env python3
"""Cross-check the linegrid binary against general-purpose reference libraries.

Run as::

    python tests/python/crosscheck.py --binary target/release/linegrid

Every check prints one line, ``PASS name: detail`` or ``FAIL name: detail``.
The last line is ``N passed, M failed``; the exit status is 1 if any check
failed.  A missing binary, a failing command or unparsable JSON is a FAIL of
the checks that needed it, never a crash.

The checks are grouped into families, one function each, listed in
``FAMILIES`` at the bottom.  A family receives a ``Runner`` (to call the
binary) and a ``Report`` (to record results); to add one (Voigt function,
grid files, ...) write ``def check_xxx(runner, report)`` and append it.

All quantities from the binary are CGS; every SI reference value is converted
to CGS explicitly here.
"""

from __future__ import annotations

import argparse
import contextlib
import io
import json
import math
import os
import subprocess
import sys
import traceback

# --------------------------------------------------------------------------
# Infrastructure
# --------------------------------------------------------------------------


class Report:
    """Collects PASS/FAIL lines and prints them as they happen."""

    def __init__(self) -> None:
        self.passed = 0
        self.failed = 0

    def record(self, ok: bool, name: str, detail: str) -> bool:
        if ok:
            self.passed += 1
        else:
            self.failed += 1
        # One line per check, whatever the detail holds.
        detail = " ".join(str(detail).split())
        print(f"{'PASS' if ok else 'FAIL'} {name}: {detail}", flush=True)
        return ok

    def ok(self, name: str, detail: str) -> bool:
        return self.record(True, name, detail)

    def fail(self, name: str, detail: str) -> bool:
        return self.record(False, name, detail)

    def summary(self) -> str:
        return f"{self.passed} passed, {self.failed} failed"


class CommandError(Exception):
    """The binary could not be run, exited non-zero, or printed bad JSON."""


def _clip(text: str, limit: int = 2000) -> str:
    text = text.strip()
    return text if len(text) <= limit else text[:limit] + " ...[cut]"


class Runner:
    """Runs the linegrid binary and parses its JSON output.

    Results (and failures) are cached per argument list, so families that
    need the same output (e.g. `atoms --json`) run the binary once."""

    def __init__(self, binary: str, timeout: float = 120.0) -> None:
        self.binary = binary
        self.timeout = timeout
        self._cache = {}

    def json(self, *args: str):
        if args not in self._cache:
            try:
                self._cache[args] = (True, self._run_json(args))
            except CommandError as exc:
                self._cache[args] = (False, exc)
        ok, result = self._cache[args]
        if not ok:
            raise CommandError(str(result))
        return json.loads(json.dumps(result))  # a fresh copy for each caller

    def _run_json(self, args):
        cmd = [self.binary, *args]
        shown = " ".join(cmd)
        try:
            proc = subprocess.run(
                cmd,
                stdin=subprocess.DEVNULL,
                capture_output=True,
                text=True,
                timeout=self.timeout,
            )
        except FileNotFoundError:
            raise CommandError(f"`{shown}`: binary not found") from None
        except PermissionError as exc:
            raise CommandError(f"`{shown}`: {exc}") from None
        except OSError as exc:
            raise CommandError(f"`{shown}`: cannot execute: {exc}") from None
        except subprocess.TimeoutExpired:
            raise CommandError(f"`{shown}`: timed out after {self.timeout:g} s") from None
        if proc.returncode != 0:
            raise CommandError(
                f"`{shown}` exited {proc.returncode}; stderr: {_clip(proc.stderr) or '(empty)'}"
            )
        if not proc.stdout.strip():
            raise CommandError(
                f"`{shown}` exited 0 but printed nothing on stdout; "
                f"stderr: {_clip(proc.stderr) or '(empty)'}"
            )
        try:
            return json.loads(proc.stdout)
        except json.JSONDecodeError as exc:
            head = proc.stdout.strip()[:200]
            raise CommandError(
                f"`{shown}` printed invalid JSON ({exc}); stdout starts: {head!r}; "
                f"stderr: {_clip(proc.stderr) or '(empty)'}"
            ) from None


def rel_diff(value: float, reference: float) -> float:
    """|value - reference| / |reference| (absolute difference if reference is 0)."""
    if reference == 0.0:
        return abs(value - reference)
    return abs(value - reference) / abs(reference)


def num_arg(x: float) -> str:
    """Format a number for the command line the way a person would type it:
    6000 -> '6000', 1e13 -> '1e13' (shortest exact form, no '+' in exponents)."""
    x = float(x)
    if x == 0.0 or 1e-4 <= abs(x) < 1e6:
        text = repr(x)  # shortest string that round-trips
        return text[:-2] if text.endswith(".0") else text
    mantissa, _, exponent = f"{x:.16e}".partition("e")
    for digits in range(0, 17):  # shortest mantissa that round-trips
        mantissa = f"{x:.{digits}e}".partition("e")[0]
        if float(f"{mantissa}e{exponent}") == x:
            break
    return f"{mantissa}e{int(exponent)}"


def is_number(x) -> bool:
    return isinstance(x, (int, float)) and not isinstance(x, bool) and math.isfinite(x)


# --------------------------------------------------------------------------
# Family 1: physical constants
# --------------------------------------------------------------------------

# The edition the binary's contract names (`"edition": "CODATA 2018"`).
EXPECTED_EDITION = "CODATA 2018"
# Tolerances from the brief: defined/exact constants and those derived only
# from exact ones, 1e-9; measured constants, 1e-8.
TOL_EXACT = 1e-9
TOL_MEASURED = 1e-8

# NAME -> (scipy.constants key, SI -> CGS factor, CGS unit).
# reference for every row: scipy.constants physical_constants (CODATA 2018
# table, or the edition the binary names; see codata_table()).
CONSTANTS = {
    "c": ("speed of light in vacuum", 1e2, "cm s^-1"),  # m s^-1 -> cm s^-1
    "h": ("Planck constant", 1e7, "erg s"),  # J s -> erg s
    "hbar": ("reduced Planck constant", 1e7, "erg s"),  # J s -> erg s
    "k": ("Boltzmann constant", 1e7, "erg K^-1"),  # J K^-1 -> erg K^-1
    "e": ("elementary charge", None, "statC"),  # C -> statC: special case, see below
    "m_e": ("electron mass", 1e3, "g"),  # kg -> g
    "m_p": ("proton mass", 1e3, "g"),  # kg -> g
    "amu": ("atomic mass constant", 1e3, "g"),  # kg -> g
    "ev": ("electron volt", 1e7, "erg"),  # J -> erg
    "a0": ("Bohr radius", 1e2, "cm"),  # m -> cm
    "rydberg_inf": ("Rydberg constant", 1e-2, "cm^-1"),  # m^-1 -> cm^-1
    "sigma_thomson": ("Thomson cross section", 1e4, "cm^2"),  # m^2 -> cm^2
    # W m^-2 K^-4 = 1e7 erg s^-1 / 1e4 cm^2 K^-4 -> factor 1e3
    "sigma_sb": ("Stefan-Boltzmann constant", 1e3, "erg cm^-2 s^-1 K^-4"),
    "k_ev": ("Boltzmann constant in eV/K", 1.0, "eV K^-1"),  # already eV K^-1
}


def codata_table(edition: str):
    """Return (table, label) for the CODATA edition named by the binary.

    scipy.constants.physical_constants holds scipy's current edition (CODATA
    2018 for scipy 1.4-1.14, CODATA 2022 from scipy 1.15).  scipy keeps the
    older editions in scipy.constants._codata as _physical_constants_YYYY
    (private, but present since scipy 1.4); use the one the binary names.
    """
    import scipy
    import scipy.constants as sc

    try:
        from scipy.constants import _codata
    except ImportError:  # pragma: no cover - very old or reorganised scipy
        _codata = None
    current = getattr(_codata, "_current_codata", None) if _codata else None
    if current is None:
        # scipy < 1.15 did not record the edition; 1.4-1.14 ship CODATA 2018.
        current = "CODATA 2018" if "reduced Planck constant" in sc.physical_constants else "unknown"
    year = "".join(ch for ch in str(edition) if ch.isdigit())
    if edition == current:
        return sc.physical_constants, f"{current} (scipy {scipy.__version__} current table)"
    table = getattr(_codata, f"_physical_constants_{year}", None) if _codata and year else None
    if isinstance(table, dict) and table:
        return table, (
            f"{edition} (scipy {scipy.__version__} carries {current}; "
            f"compared with its stored {edition} table)"
        )
    return sc.physical_constants, (
        f"{current} (scipy {scipy.__version__} has no {edition!r} table; "
        f"compared with its current table instead)"
    )


def reference_cgs(table, name: str):
    """(value in CGS, exact?) for constant NAME from a scipy CODATA table."""
    key, factor, _unit = CONSTANTS[name]
    value_si, _unit_si, unc_si = table[key]
    if name == "e":
        # reference: scipy.constants elementary charge (C) and speed of light
        # (m s^-1). 1 C = 10 c_SI statC (c_SI = 299792458, the numerical
        # value in m s^-1), so e_esu = e_SI * 10 * c_SI, exact given the SI
        # definitions of e and c.
        c_si, _, c_unc = table["speed of light in vacuum"]
        return value_si * 10.0 * c_si, unc_si == 0.0 and c_unc == 0.0
    # CODATA lists exact (defined or derived-from-defined) values with
    # uncertainty 0.
    return value_si * factor, unc_si == 0.0


def check_constants(runner: Runner, report: Report) -> None:
    """`linegrid constants --json` against scipy.constants (CODATA)."""
    family = "constants"
    try:
        data = runner.json("constants", "--json")
    except CommandError as exc:
        report.fail(f"{family}.command", str(exc))
        return
    try:
        import scipy.constants  # noqa: F401
    except ImportError as exc:
        report.fail(f"{family}.reference", f"scipy not importable: {exc}")
        return

    edition = data.get("edition") if isinstance(data, dict) else None
    consts = data.get("constants") if isinstance(data, dict) else None
    if not isinstance(edition, str) or not isinstance(consts, dict):
        report.fail(
            f"{family}.schema",
            f"expected {{'edition': str, 'constants': {{...}}}}, got keys "
            f"{sorted(data) if isinstance(data, dict) else type(data).__name__}",
        )
        return
    table, label = codata_table(edition)
    # reference: the JSON contract of `linegrid constants --json`.
    report.record(
        edition == EXPECTED_EDITION,
        f"{family}.edition",
        f"binary says {edition!r}, contract says {EXPECTED_EDITION!r}; values compared with {label}",
    )

    for name in CONSTANTS:
        check = f"{family}.{name}"
        entry = consts.get(name)
        if not isinstance(entry, dict) or not is_number(entry.get("value")):
            report.fail(check, f"missing or non-numeric in binary output: {entry!r}")
            continue
        value = float(entry["value"])
        try:
            ref, exact = reference_cgs(table, name)
        except KeyError as exc:
            report.fail(check, f"reference table lacks {exc}")
            continue
        tol = TOL_EXACT if exact else TOL_MEASURED
        d = rel_diff(value, ref)
        report.record(
            d <= tol,
            check,
            f"{value:.12g} {entry.get('units', '?')} vs {ref:.12g} {CONSTANTS[name][2]} "
            f"[{'exact' if exact else 'measured'}] rel diff {d:.2e} (tol {tol:g}); "
            f"reference {label}",
        )


# --------------------------------------------------------------------------
# Family 2: atomic data
# --------------------------------------------------------------------------

# reference: Lykke, Murray & Lineberger 1991, Phys. Rev. A 43, 6104
# (electron affinity of H, 0.754195 eV).
H_MINUS_AFFINITY_EV = 0.754195
TOL_H_MINUS_EV = 1e-6
TOL_IONIZATION_EV = 0.01
TOL_MASS_AMU = 0.01

ROMAN = ["I", "II", "III", "IV", "V", "VI", "VII", "VIII", "IX", "X",
         "XI", "XII", "XIII", "XIV", "XV", "XVI", "XVII", "XVIII", "XIX", "XX",
         "XXI", "XXII", "XXIII", "XXIV", "XXV", "XXVI", "XXVII"]


def expected_species_name(symbol: str, charge: int) -> str | None:
    """Spectroscopic name: charge 0 -> 'Fe I', +1 -> 'Fe II', -1 -> 'H-'."""
    if charge == -1:
        return f"{symbol}-"
    if 0 <= charge < len(ROMAN):
        return f"{symbol} {ROMAN[charge]}"
    return None


def load_mendeleev():
    with contextlib.redirect_stdout(io.StringIO()):
        from mendeleev import element
    cache = {}

    def lookup(symbol: str):
        if symbol not in cache:
            cache[symbol] = element(symbol)
        return cache[symbol]

    return lookup


def check_atoms(runner: Runner, report: Report) -> None:
    """`linegrid atoms --json` against mendeleev and the H- electron affinity."""
    family = "atoms"
    try:
        data = runner.json("atoms", "--json")
    except CommandError as exc:
        report.fail(f"{family}.command", str(exc))
        return
    try:
        element = load_mendeleev()
    except Exception as exc:  # ImportError, or its database failing to open
        report.fail(f"{family}.reference", f"mendeleev not usable: {exc}")
        return

    elements = data.get("elements") if isinstance(data, dict) else None
    species = data.get("species") if isinstance(data, dict) else None
    if not isinstance(elements, list) or not isinstance(species, list):
        report.fail(f"{family}.schema", "expected {'elements': [...], 'species': [...]}")
        return

    # Elements: z and mass.
    # reference: mendeleev atomic_number and atomic_weight (standard atomic
    # weights, IUPAC/CIAAW).
    known = set()
    for el in elements:
        symbol = el.get("symbol") if isinstance(el, dict) else None
        check = f"{family}.element.{symbol}"
        if not isinstance(symbol, str):
            report.fail(f"{family}.element", f"entry without a symbol: {el!r}")
            continue
        known.add(symbol)
        try:
            ref = element(symbol)
        except Exception as exc:
            report.fail(check, f"mendeleev does not know {symbol!r}: {exc}")
            continue
        problems = []
        z, mass = el.get("z"), el.get("mass_amu")
        if z != ref.atomic_number:
            problems.append(f"z {z!r} != {ref.atomic_number}")
        if not is_number(mass):
            problems.append(f"mass_amu {mass!r} not a number")
        elif ref.atomic_weight is None:
            problems.append("mendeleev has no atomic_weight")
        elif abs(mass - ref.atomic_weight) > TOL_MASS_AMU:
            problems.append(
                f"mass {mass} vs {ref.atomic_weight} amu (|diff| {abs(mass - ref.atomic_weight):.3g} > {TOL_MASS_AMU})"
            )
        if problems:
            report.fail(check, "; ".join(problems) + " (reference: mendeleev)")
        else:
            report.ok(
                check,
                f"z {z}, mass {mass} vs {ref.atomic_weight} amu (tol {TOL_MASS_AMU}; reference: mendeleev)",
            )

    # Species: names consistent with element/charge (internal consistency of
    # the JSON; reference: spectroscopic notation, charge 0 = I).
    bad_names = []
    for sp in species:
        if not isinstance(sp, dict):
            bad_names.append(repr(sp))
            continue
        want = expected_species_name(sp.get("element"), sp.get("charge")) if isinstance(
            sp.get("charge"), int) else None
        if sp.get("name") != want or sp.get("element") not in known:
            bad_names.append(
                f"{sp.get('name')!r} (element {sp.get('element')!r}, charge {sp.get('charge')!r})"
            )
    report.record(
        not bad_names and bool(species),
        f"{family}.species_names",
        f"{len(species)} species named '<symbol> <roman charge+1>' or '<symbol>-' "
        f"with element in the element list"
        + (f"; inconsistent: {', '.join(bad_names)}" if bad_names else "")
        + ("; no species listed" if not species else ""),
    )

    # Species: ionization energies (electron affinity for anions).
    for sp in species:
        if not isinstance(sp, dict):
            continue
        name, symbol, charge, ion = sp.get("name"), sp.get("element"), sp.get("charge"), sp.get("ionization_ev")
        check = f"{family}.ionization.{name}".replace(" ", "_")
        if ion is None:
            continue  # e.g. H II, a bare nucleus: nothing to compare
        if not is_number(ion) or not isinstance(charge, int):
            report.fail(check, f"ionization_ev {ion!r} / charge {charge!r} not numeric")
            continue
        if charge == -1 and symbol == "H":
            # reference: Lykke, Murray & Lineberger 1991, PRA 43, 6104.
            d = abs(ion - H_MINUS_AFFINITY_EV)
            report.record(
                d <= TOL_H_MINUS_EV,
                check,
                f"electron affinity {ion} vs {H_MINUS_AFFINITY_EV} eV (|diff| {d:.2e}, tol {TOL_H_MINUS_EV:g}; "
                f"reference: Lykke, Murray & Lineberger 1991, PRA 43, 6104)",
            )
            continue
        try:
            ref_el = element(symbol)
        except Exception as exc:
            report.fail(check, f"mendeleev does not know {symbol!r}: {exc}")
            continue
        if charge < 0:
            # reference: mendeleev electron_affinity (eV) for anions other than H-.
            ref, what = ref_el.electron_affinity, "electron affinity"
        else:
            # reference: mendeleev ionenergies[charge + 1] (eV; NIST ASD-derived).
            ref, what = ref_el.ionenergies.get(charge + 1), "ionization energy"
        if ref is None:
            report.fail(check, f"{ion} eV but mendeleev has no {what} for {name}")
            continue
        d = abs(ion - ref)
        report.record(
            d <= TOL_IONIZATION_EV,
            check,
            f"{what} {ion} vs {ref} eV (|diff| {d:.2e}, tol {TOL_IONIZATION_EV}; reference: mendeleev)",
        )


# --------------------------------------------------------------------------
# Family 3: pure-hydrogen Saha state
# --------------------------------------------------------------------------

STATE_TEMPERATURES = [6000.0, 8000.0, 10000.0, 12000.0]  # K
STATE_ELECTRON_DENSITIES = [1e10, 1e13]  # cm^-3
TOL_SAHA = 1e-6
TOL_CONSERVATION = 1e-10
TOL_ECHO = 1e-12
# Fallback only: used if `linegrid atoms --json` gives no H I ionization energy.
H_IONIZATION_EV_FALLBACK = 13.598434


def load_plasmapy_saha():
    """plasmapy.formulary.ionization.Saha, imported with its chatter silenced.

    (plasmapy's data downloader prints a line to stdout at import when it
    cannot reach its remote data repository; that line must not land among
    the PASS/FAIL lines.)
    """
    with contextlib.redirect_stdout(io.StringIO()):
        import astropy.units as u
        from plasmapy.formulary.ionization import Saha
    return Saha, u


def hydrogen_ionization_ev(runner: Runner):
    """The binary's own H I ionization energy, so that the Saha check tests
    formula and constants rather than the datum (the datum is checked by the
    atoms family against mendeleev).  This matters at the 1e-6 tolerance:
    mendeleev/NIST give 13.598434599702 eV, and using the rounded 13.598434 eV
    instead shifts the ratio by exp(6e-7 eV / kT) - 1 = 1.16e-6 at 6000 K.
    Returns (value, note)."""
    try:
        atoms = runner.json("atoms", "--json")
        for sp in atoms.get("species", []):
            if sp.get("name") == "H I" and is_number(sp.get("ionization_ev")):
                return float(sp["ionization_ev"]), "binary's H I ionization energy"
    except (CommandError, AttributeError):
        pass
    return H_IONIZATION_EV_FALLBACK, "fallback E (atoms --json gave no H I value)"


def species_field(state, name: str, field: str) -> float:
    value = state["species"][name][field]
    if not is_number(value):
        raise ValueError(f"species[{name!r}][{field!r}] = {value!r}")
    return float(value)


def check_state_hydrogen(runner: Runner, report: Report) -> None:
    """`linegrid state --pure-hydrogen` against plasmapy's Saha equation,
    plus charge, nucleus and pressure conservation within the same output."""
    family = "state"
    try:
        Saha, u = load_plasmapy_saha()
        saha_error = None
    except Exception as exc:
        Saha, u, saha_error = None, None, f"plasmapy not usable: {exc}"
    try:
        import scipy.constants as sc
    except ImportError as exc:
        report.fail(f"{family}.reference", f"scipy not importable: {exc}")
        return
    # reference: scipy.constants Boltzmann constant, exact since 2019 SI,
    # J K^-1 -> erg K^-1 (x 1e7).
    k_cgs = sc.k * 1e7
    e_ion_ev, e_note = hydrogen_ionization_ev(runner)

    for T in STATE_TEMPERATURES:
        for ne_in in STATE_ELECTRON_DENSITIES:
            tag = f"T={num_arg(T)},ne={num_arg(ne_in)}"
            try:
                st = runner.json(
                    "state",
                    "--temperature", num_arg(T),
                    "--electron-density", num_arg(ne_in),
                    "--pure-hydrogen",
                    "--json",
                )
            except CommandError as exc:
                report.fail(f"{family}.command[{tag}]", str(exc))
                continue
            try:
                temp = float(st["temperature"])
                ne = float(st["electron_density"])
                p_gas = float(st["gas_pressure"])
                n_h = float(st["hydrogen_density"])
                n_h1 = species_field(st, "H I", "density")
                n_h2 = species_field(st, "H II", "density")
                n_hm = species_field(st, "H-", "density")
                u_h1 = species_field(st, "H I", "partition_function")
                u_h2 = species_field(st, "H II", "partition_function")
                status = st.get("status")
            except (KeyError, TypeError, ValueError) as exc:
                report.fail(f"{family}.schema[{tag}]", f"missing or non-numeric field: {exc}")
                continue

            # Solver outcome (contract: "status": "converged").
            report.record(status == "converged", f"{family}.status[{tag}]", f"status {status!r}")

            # Inputs echoed back.
            d_t, d_ne = rel_diff(temp, T), rel_diff(ne, ne_in)
            report.record(
                d_t <= TOL_ECHO and d_ne <= TOL_ECHO,
                f"{family}.inputs[{tag}]",
                f"temperature {temp:.12g} K, electron_density {ne:.12g} cm^-3 echo the request "
                f"(rel diffs {d_t:.1e}, {d_ne:.1e}; tol {TOL_ECHO:g})",
            )

            # Saha ratio n(H II)/n(H I).
            # reference: plasmapy.formulary.ionization.Saha(g_j, g_k, n_e, E_jk, T_e)
            # returns N_j/N_k = (1/n_e) g_j/(4 g_k a0^3) (k T/(pi Ry))^(3/2)
            # exp(-E_jk/(k T)), with n_e in m^-3.  Since
            # (1/(4 a0^3)) (kT/(pi Ry))^(3/2) = 2 (2 pi m_e k T/h^2)^(3/2),
            # this is the usual Saha equation with the electron spin factor 2
            # built in: j is the MORE ionised state (numerator, here H II,
            # g_j = 1) and k the less ionised one (denominator, H I, g_k = 2).
            # The binary's ratio carries U(H II)/U(H I) instead of g_j/g_k, so
            # it is rescaled by U(H I)/2 and 1/U(H II) (= 1, a bare proton).
            check = f"{family}.saha[{tag}]"
            if saha_error:
                report.fail(check, saha_error)
            elif n_h1 <= 0:
                report.fail(check, f"n(H I) = {n_h1!r}")
            else:
                binary_ratio = n_h2 / n_h1
                scaled = binary_ratio * (u_h1 / 2.0) / u_h2
                try:
                    ref = float(
                        Saha(1, 2, ne * 1e6 * u.m**-3, e_ion_ev * u.eV, temp * u.K)
                        .to(u.dimensionless_unscaled)
                        .value
                    )  # cm^-3 -> m^-3: x 1e6
                except Exception as exc:
                    report.fail(check, f"plasmapy Saha raised {exc!r}")
                else:
                    d = rel_diff(scaled, ref)
                    report.record(
                        d <= TOL_SAHA,
                        check,
                        f"n(H II)/n(H I) x U(H I)/2 / U(H II) = {binary_ratio:.10g} x {u_h1:.10g}/2 / "
                        f"{u_h2:.10g} = {scaled:.10g} vs plasmapy Saha(g_j=1, g_k=2, E={e_ion_ev} eV "
                        f"[{e_note}]) {ref:.10g}; rel diff {d:.2e} (tol {TOL_SAHA:g})",
                    )

            # Charge conservation: n_e = n(H II) - n(H-)   (pure hydrogen).
            q = n_h2 - n_hm
            d = rel_diff(ne, q)
            report.record(
                d <= TOL_CONSERVATION,
                f"{family}.charge[{tag}]",
                f"n_e {ne:.12g} vs n(H II) - n(H-) {q:.12g}; rel diff {d:.2e} (tol {TOL_CONSERVATION:g})",
            )

            # Nucleus conservation: n(H-) + n(H I) + n(H II) = n_H.
            s = n_hm + n_h1 + n_h2
            d = rel_diff(s, n_h)
            report.record(
                d <= TOL_CONSERVATION,
                f"{family}.nuclei[{tag}]",
                f"n(H-)+n(H I)+n(H II) {s:.12g} vs hydrogen_density {n_h:.12g}; rel diff {d:.2e} "
                f"(tol {TOL_CONSERVATION:g})",
            )

            # Ideal gas: P = (n_H + n_e) k T, k from scipy.constants (CGS).
            p_ref = (n_h + ne) * k_cgs * temp
            d = rel_diff(p_gas, p_ref)
            report.record(
                d <= TOL_CONSERVATION,
                f"{family}.pressure[{tag}]",
                f"gas_pressure {p_gas:.12g} vs (n_H + n_e) k T {p_ref:.12g} dyn cm^-2; rel diff {d:.2e} "
                f"(tol {TOL_CONSERVATION:g}; k: scipy.constants)",
            )


# --------------------------------------------------------------------------
# Family 4: the Voigt function H(a, v)
# --------------------------------------------------------------------------

# Brief: maximum relative error of H against scipy.special.wofz over the
# domain a in [1e-5, 1e2], |v| <= 1e4.
TOL_VOIGT = 1e-6
VOIGT_SEED = 20240601


def voigt_points():
    """(a, v) arrays: a 200 x 200 grid (a log-spaced over [1e-5, 1e2]; v = 0
    and log-spaced over [1e-3, 1e4]), 20000 random points over the same
    ranges with random signs of v, and 20000 random points in the line core
    |v| <= 10, a <= 10, where the binary's evaluation regions meet (fixed
    seed)."""
    import numpy as np

    a_grid = np.geomspace(1e-5, 1e2, 200)
    v_grid = np.concatenate([[0.0], np.geomspace(1e-3, 1e4, 199)])
    a, v = (x.ravel() for x in np.meshgrid(a_grid, v_grid, indexing="ij"))
    rng = np.random.default_rng(VOIGT_SEED)
    n = 20000
    a_wide = 10.0 ** rng.uniform(-5.0, 2.0, n)
    v_wide = rng.choice([-1.0, 1.0], n) * 10.0 ** rng.uniform(-3.0, 4.0, n)
    a_core = 10.0 ** rng.uniform(-5.0, 1.0, n)
    v_core = rng.uniform(-10.0, 10.0, n)
    return np.concatenate([a, a_wide, a_core]), np.concatenate([v, v_wide, v_core])


def run_with_stdin(runner: Runner, args, text: str) -> str:
    """Run the binary with `text` on stdin; its stdout, or CommandError."""
    cmd = [runner.binary, *args]
    shown = " ".join(cmd) + " < (input)"
    try:
        proc = subprocess.run(
            cmd, input=text, capture_output=True, text=True, timeout=runner.timeout
        )
    except FileNotFoundError:
        raise CommandError(f"`{shown}`: binary not found") from None
    except OSError as exc:
        raise CommandError(f"`{shown}`: cannot execute: {exc}") from None
    except subprocess.TimeoutExpired:
        raise CommandError(f"`{shown}`: timed out after {runner.timeout:g} s") from None
    if proc.returncode != 0:
        raise CommandError(
            f"`{shown}` exited {proc.returncode}; stderr: {_clip(proc.stderr) or '(empty)'}"
        )
    return proc.stdout


def check_voigt(runner: Runner, report: Report) -> None:
    """`linegrid voigt` (pairs `a v` on stdin, CSV `a,v,H` out) against the
    real part of scipy.special.wofz, w(z) = exp(-z^2) erfc(-iz), H(a, v) =
    Re w(v + ia)."""
    family = "voigt"
    try:
        import numpy as np
        from scipy.special import wofz
    except ImportError as exc:
        report.fail(f"{family}.reference", f"numpy/scipy not importable: {exc}")
        return
    a, v = voigt_points()
    text = "".join(f"{float(x)!r} {float(y)!r}\n" for x, y in zip(a, v))
    try:
        out = run_with_stdin(runner, ["voigt"], text)
    except CommandError as exc:
        report.fail(f"{family}.command", str(exc))
        return
    rows = [line.split(",") for line in out.splitlines() if line.strip()]
    try:
        got = np.array(rows, dtype=float)
    except ValueError as exc:
        report.fail(f"{family}.schema", f"output is not CSV a,v,H: {exc}; first line {out[:120]!r}")
        return
    if got.ndim != 2 or got.shape != (len(a), 3):
        report.fail(
            f"{family}.schema",
            f"expected {len(a)} lines a,v,H, got array of shape {got.shape}",
        )
        return
    echoed = np.array_equal(got[:, 0], a) and np.array_equal(got[:, 1], v)
    # reference: scipy.special.wofz (the Faddeeva package of S. G. Johnson),
    # H(a, v) = Re w(v + i a).
    ref = wofz(v + 1j * a).real
    h = got[:, 2]
    with np.errstate(divide="ignore", invalid="ignore"):
        err = np.where(ref != 0.0, np.abs(h - ref) / np.abs(ref), np.abs(h - ref))
    err = np.where(np.isfinite(err), err, np.inf)
    k = int(np.argmax(err))
    worst = float(err[k])
    report.record(
        worst <= TOL_VOIGT and echoed,
        f"{family}.wofz",
        f"H(a, v) at {len(a)} points (a in [1e-5, 1e2], |v| <= 1e4): max relative error "
        f"{worst:.2e} at a={a[k]:.17g}, v={v[k]:.17g} (H {h[k]:.17g} vs {ref[k]:.17g}); "
        f"tol {TOL_VOIGT:g}; reference: scipy.special.wofz (Faddeeva package, S. G. Johnson)"
        + ("" if echoed else "; the a,v columns do not echo the input exactly"),
    )


# --------------------------------------------------------------------------
# Driver
# --------------------------------------------------------------------------

# Families in the order they run; append new ones (Voigt function, grid files).
FAMILIES = {
    "constants": check_constants,
    "atoms": check_atoms,
    "state": check_state_hydrogen,
    "voigt": check_voigt,
}


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--binary", default="target/release/linegrid",
                        help="path to the linegrid binary (default: %(default)s)")
    parser.add_argument("--only", action="append", choices=sorted(FAMILIES),
                        help="run only this family (may be repeated)")
    parser.add_argument("--timeout", type=float, default=120.0,
                        help="seconds allowed per binary invocation (default: %(default)s)")
    args = parser.parse_args(argv)

    binary = args.binary
    if os.sep in binary or (os.altsep and os.altsep in binary):
        binary = os.path.abspath(binary)
    runner = Runner(binary, timeout=args.timeout)
    report = Report()

    for name, family in FAMILIES.items():
        if args.only and name not in args.only:
            continue
        try:
            family(runner, report)
        except Exception:  # a bug here, or output shaped unlike the contract
            last = traceback.format_exc().strip().splitlines()
            report.fail(f"{name}.crashed", " | ".join(last[-3:]))

    print(report.summary(), flush=True)
    return 1 if report.failed else 0


if __name__ == "__main__":
    sys.exit(main())
