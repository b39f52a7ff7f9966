"""Plant small errors in the physics, one at a time, and check that the tests catch each.

    python tests/mutations.py            # every mutation, with the tests named beside it
    python tests/mutations.py W-t-u      # the mutations whose name contains W-t-u
    python tests/mutations.py --list

Each mutation replaces one exact snippet of one module (the snippet must occur exactly once)
in a copy of the repository, then runs the named tests in the copy (from its root, so that the
copy's `gen` is the one imported; PYTHONPATH carries it to the commands the tests start). A mutation is caught when a test fails. The unmutated copy runs first as the control:
its tests must pass. Not part of CI (about ten minutes); its last result is in DEVELOPERS.md.
"""

from __future__ import annotations

import os
import shutil
import subprocess
import sys
import tempfile
import time
from dataclasses import dataclass
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent


@dataclass(frozen=True)
class Mutation:
    name: str
    module: str  # path under gen/
    old: str
    new: str
    tests: tuple[str, ...]  # pytest node ids or files under tests/


EW = "physics/matrix/electroweak.py"
QCD = "physics/matrix/qcd.py"
QED = "physics/matrix/qed.py"
WIDTHS = "physics/widths.py"

MUTATIONS = [
    # the planted errors of the test-strength review
    Mutation("W-t-u-swapped", EW, "x = t if incoming_fermion_first else u", "x = u if incoming_fermion_first else t",
             ("tests/test_orientation.py",)),
    Mutation("hadron-cos-flipped", "processes/hadron.py", "t, u = mandelstam_tu(shat, 0.0, 0.0, m3, m4, omc, opc)",
             "t, u = mandelstam_tu(shat, 0.0, 0.0, m3, m4, opc, omc)", ("tests/test_orientation.py",)),
    Mutation("qq-flow-weights-swapped", QCD,
             '"qq": _flows(([(3, 0), (2, 1)], _t_channel_gluon), ([(2, 0), (3, 1)], _u_channel_gluon)),',
             '"qq": _flows(([(3, 0), (2, 1)], _u_channel_gluon), ([(2, 0), (3, 1)], _t_channel_gluon)),',
             ("tests/test_orientation.py",)),
    Mutation("Z-width-mass-factor-dropped", WIDTHS, "b * ((3.0 - b * b) / 2.0 * v * v + b * b * a * a)",
             "b * (v * v + b * b * a * a)", ("tests/test_widths.py",)),
    Mutation("muon-f-8x-sign", WIDTHS, "f = 1.0 - 8.0 * x + 8.0 * x**3", "f = 1.0 + 8.0 * x + 8.0 * x**3",
             ("tests/test_widths.py",)),
    Mutation("H-ff-beta-cubed", WIDTHS, "_beta(m_h, m_f) ** 3", "_beta(m_h, m_f)", ("tests/test_widths.py",)),
    Mutation("alpha-mz-digit", "physics/constants.py", "ALPHA_MZ = 1.0 / 127.951", "ALPHA_MZ = 1.0 / 128.951",
             ("tests/test_parameters.py", "tests/test_cross_sections.py")),
    Mutation("ckm-squared", EW, "c2, s2 = math.cos(theta) ** 2, math.sin(theta) ** 2",
             "c2, s2 = abs(math.cos(theta)), abs(math.sin(theta))", ("tests/test_parameters.py", "tests/test_hadron.py")),
    # more of the same kind
    Mutation("Z-vector-coupling", EW, "return q, sp.t3 - q * sw2, -q * sw2", "return q, sp.t3 - 2 * q * sw2, -q * sw2",
             ("tests/test_cross_sections.py",)),
    Mutation("ZH-bracket", EW, "bracket = 0.5 * s + (mz2 - t) * (mz2 - u) / (2.0 * mz2)",
             "bracket = 0.5 * s + (mz2 - t) * (mz2 - u) / mz2", ("tests/test_cross_sections.py",)),
    Mutation("ggH-normalization", EW, "s * s / (288.0 * math.sqrt(2.0) * math.pi**2)",
             "s * s / (144.0 * math.sqrt(2.0) * math.pi**2)", ("tests/test_hadron.py",)),
    Mutation("muon-decay-me", EW, "return 64.0 * gf * gf * dot(p[:, 0], p[:, 2]) * dot(p[:, 1], p[:, 3])",
             "return 64.0 * gf * gf * dot(p[:, 0], p[:, 1]) * dot(p[:, 2], p[:, 3])",
             ("tests/test_widths.py", "tests/test_decays.py", "tests/test_cross_sections.py", "tests/test_validate.py")),
    Mutation("gg-gg-constant", QCD, "return 4.5 * (3.0 - t * u / (s * s)", "return 4.0 * (3.0 - t * u / (s * s)",
             ("tests/test_qcd.py", "tests/test_hadron.py")),
    Mutation("qq-interference-sign", QCD, "- 8.0 / 27.0 * s * s / (u * t)", "+ 8.0 / 27.0 * s * s / (u * t)",
             ("tests/test_qcd.py", "tests/test_hadron.py")),
    Mutation("gq-gq-sign", QCD, "return -4.0 / 9.0 * (s * s + u * u) / (s * u)",
             "return 4.0 / 9.0 * (s * s + u * u) / (s * u)", ("tests/test_qcd.py", "tests/test_hadron.py")),
    Mutation("W-width-denominator", WIDTHS, "m_w**3 / (6.0 * _SQRT2 * math.pi)", "m_w**3 / (12.0 * _SQRT2 * math.pi)",
             ("tests/test_widths.py",)),
    Mutation("top-width-helicity-factor", WIDTHS, "(1.0 - x) ** 2 * (1.0 + 2.0 * x)", "(1.0 - x) ** 2 * (1.0 + x)",
             ("tests/test_widths.py",)),
    Mutation("W-charge-partons-swapped", EW, 'for _up, _down in (("u", "d"), ("u", "s"), ("c", "d"), ("c", "s")):',
             'for _down, _up in (("u", "d"), ("u", "s"), ("c", "d"), ("c", "s")):', ("tests/test_orientation.py",)),
    Mutation("hadron-orientation-ignored", "processes/hadron.py",
             "me[k] = spec.matrix(shat, u, t, par_k) if swapped else spec.matrix(shat, t, u, par_k)",
             "me[k] = spec.matrix(shat, t, u, par_k)", ("tests/test_orientation.py",)),
    Mutation("Z-width-axial-beta", WIDTHS, "(3.0 - b * b) / 2.0 * v * v + b * b * a * a",
             "(3.0 - b * b) / 2.0 * v * v + b * a * a", ("tests/test_widths.py",)),
    Mutation("bhabha-interference-sign", QED, "+ 2.0 * u * u / (s * t) +", "- 2.0 * u * u / (s * t) +",
             ("tests/test_cross_sections.py", "tests/test_matrix_elements.py")),
    Mutation("moller-interference", QED, "+ 2.0 * s * s / (t * u) +", "+ 1.0 * s * s / (t * u) +",
             ("tests/test_cross_sections.py", "tests/test_matrix_elements.py")),
    Mutation("compton-mass-term", QED, "4.0 * m2 * m2 * r * r", "2.0 * m2 * m2 * r * r",
             ("tests/test_cross_sections.py", "tests/test_matrix_elements.py")),
    Mutation("pair-mass-term", QED, "(u - m2) ** 2 + 2.0 * m2 * s) / s**2", "(u - m2) ** 2 + 1.0 * m2 * s) / s**2",
             ("tests/test_cross_sections.py", "tests/test_matrix_elements.py")),
    Mutation("hbarc2-digit", "physics/constants.py", "HBARC2_PB = 0.3893793721e9", "HBARC2_PB = 0.3883793721e9",
             ("tests/test_cross_sections.py",)),
    Mutation("fermi-scheme-alpha", EW, "alpha=math.sqrt(2.0) * gf * mw * mw * sw2 / math.pi",
             "alpha=math.sqrt(2.0) * gf * mz * mw * sw2 / math.pi", ("tests/test_parameters.py",)),
    Mutation("half-ht-without-masses", "processes/hadron.py", "0.5 * sum(np.sqrt(m * m + pt * pt) for m in self.m_out)",
             "0.5 * sum(pt for m in self.m_out)", ("tests/test_parameters.py",)),
    Mutation("scale-factor-ignored", "processes/hadron.py", "return np.maximum(mu * f, 1.0)",
             "return np.maximum(mu, 1.0)",
             ("tests/test_parameters.py",)),
    Mutation("reference-e-mu-mass-term", "physics/references.py", "(u - mm) ** 2 + 2 * mm * t) / t**2",
             "(u - mm) ** 2 + 1 * mm * t) / t**2", ("tests/test_references.py",)),
    Mutation("reference-annihilation-m4", "physics/references.py", "- 4 * m**4 * r * r)", "- 2 * m**4 * r * r)",
             ("tests/test_references.py",)),
    Mutation("alpha-s-beta0", "physics/pdf.py", "b0 = (33.0 - 2.0 * nf)", "b0 = (33.0 - 1.0 * nf)",
             ("tests/test_pdf.py",)),
    Mutation("alpha-s-beta1", "physics/pdf.py", "b1 = (153.0 - 19.0 * nf)", "b1 = (153.0 - 17.0 * nf)",
             ("tests/test_pdf.py",)),
    Mutation("Breit-Wigner-jacobian", "physics/kinematics.py", "return s, (a_hi - a_lo) * ((s - m2) ** 2 + mg * mg) / mg",
             "return s, (a_hi - a_lo) * ((s - m2) ** 2 + mg * mg) / (mg * 1.01)",
             ("tests/test_kinematics.py", "tests/test_phasespace.py", "tests/test_hadron.py")),
    Mutation("power-map-jacobian", "physics/kinematics.py", "return s, (hi**e - lo**e) / e * s**self.nu",
             "return s, (hi**e - lo**e) / e * s**(self.nu * 0.99)",
             ("tests/test_kinematics.py", "tests/test_phasespace.py", "tests/test_hadron.py")),
]


def _copy() -> Path:
    """A copy of the package and what its tests read, run from its own root (so that its `gen`,
    not the installed one, is imported: the working directory comes first on sys.path)."""
    tmp = Path(tempfile.mkdtemp(prefix="gen-mutant-"))
    skip = shutil.ignore_patterns("__pycache__", "*.pyc")
    for folder in ("gen", "tests", "cards"):
        shutil.copytree(ROOT / folder, tmp / folder, ignore=skip)
    shutil.copytree(ROOT / "schema", tmp / "gen" / "schema", dirs_exist_ok=True)
    for name in ("README.md", "DEVELOPERS.md", "pyproject.toml"):
        shutil.copy(ROOT / name, tmp / name)
    return tmp


def _run(tests: tuple[str, ...], tree: Path) -> tuple[bool, float, str]:
    env = dict(os.environ, PYTHONPATH=str(tree), PYTHONDONTWRITEBYTECODE="1")
    t0 = time.monotonic()
    r = subprocess.run([sys.executable, "-m", "pytest", "-x", "-q", "-p", "no:cacheprovider", *tests],
                       cwd=tree, env=env, capture_output=True, text=True)
    failed = [ln for ln in r.stdout.splitlines() if ln.startswith(("FAILED", "ERROR"))]
    return r.returncode == 0, time.monotonic() - t0, failed[0] if failed else r.stdout.strip().splitlines()[-1]


def main(argv: list[str]) -> int:
    if "--list" in argv:
        for m in MUTATIONS:
            print(f"{m.name:<30} gen/{m.module}")
        return 0
    chosen = [m for m in MUTATIONS if not argv or any(a in m.name for a in argv)]
    control = _copy()
    try:
        probe = subprocess.run([sys.executable, "-c", "import gen; print(gen.__file__)"], capture_output=True,
                               text=True, env=dict(os.environ, PYTHONPATH=str(control)), cwd=control)
        assert probe.stdout.strip().startswith(str(control)), f"the copy is not imported first: {probe.stdout}"
        tests = tuple(sorted({t for m in chosen for t in m.tests}))
        ok, dt, last = _run(tests, control)
        print(f"control (no mutation): {'pass' if ok else 'FAIL'} in {dt:.0f} s  {last}")
        if not ok:
            return 1
    finally:
        shutil.rmtree(control, ignore_errors=True)
    survived = []
    for m in chosen:
        tree = _copy()
        try:
            path = tree / "gen" / m.module
            text = path.read_text()
            if text.count(m.old) != 1:
                print(f"{m.name:<30} NOT APPLIED: the snippet occurs {text.count(m.old)} times in gen/{m.module}")
                survived.append(m.name)
                continue
            path.write_text(text.replace(m.old, m.new))
            ok, dt, last = _run(m.tests, tree)
            print(f"{m.name:<30} {'SURVIVED' if ok else 'caught  '} {dt:5.0f} s  {last[:110]}")
            if ok:
                survived.append(m.name)
        finally:
            shutil.rmtree(tree, ignore_errors=True)
        sys.stdout.flush()
    print(f"{len(chosen) - len(survived)} of {len(chosen)} caught" + (f"; survived: {', '.join(survived)}" if survived else ""))
    return 1 if survived else 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
