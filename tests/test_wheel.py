"""The built wheel carries every data file: install it into a fresh venv and run the demo.

A data file missing from the wheel (parameter table, template, counterion library) makes
this test fail, although the editable checkout would work.
"""
from __future__ import annotations

import json
import os
import site
import subprocess
import sys
import sysconfig
import venv
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent

pytestmark = pytest.mark.slow


def _run(cmd, cwd, env=None):
    return subprocess.run(cmd, cwd=cwd, env=env, capture_output=True, text=True, timeout=900)


def _dependency_dirs() -> list[str]:
    """site-packages folders of the running interpreter (venv or system), in order."""
    dirs = [sysconfig.get_path("purelib"), sysconfig.get_path("platlib"), *site.getsitepackages()]
    return list(dict.fromkeys(d for d in dirs if d and Path(d).is_dir()))


@pytest.fixture(scope="module")
def wheel_venv(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("wheel")
    built = _run([sys.executable, "-m", "pip", "wheel", "--no-deps", "-q", "-w", str(tmp), str(ROOT)], cwd=tmp)
    assert built.returncode == 0, built.stderr[-2000:]
    wheel = next(tmp.glob("saltplan-*.whl"))
    env_dir = tmp / "venv"
    # The package itself comes only from the wheel; its dependencies from the site-packages of
    # the interpreter running the tests (a virtual environment or a system interpreter alike).
    # `system_site_packages=True` would expose the *base* interpreter instead, which lacks them
    # inside a venv. A path listed in a .pth file is appended to sys.path after the new venv's
    # own site-packages, and .pth files inside it (the editable checkout's) are not run.
    venv.EnvBuilder(with_pip=True).create(env_dir)
    py = env_dir / "bin" / "python"
    site_dir = _run([str(py), "-c", "import sysconfig; print(sysconfig.get_path('purelib'))"], cwd=tmp)
    assert site_dir.returncode == 0, site_dir.stderr
    (Path(site_dir.stdout.strip()) / "_saltplan_test_deps.pth").write_text(
        "".join(f"{p}\n" for p in _dependency_dirs()), encoding="utf-8")
    inst = _run([str(py), "-m", "pip", "install", "-q", "--no-deps", "--no-index", str(wheel)], cwd=tmp)
    assert inst.returncode == 0, inst.stderr[-2000:]
    env = {k: v for k, v in os.environ.items() if k not in ("PYTHONPATH",)}
    env["PYTHONNOUSERSITE"] = "1"
    # hide the editable checkout: run from a folder that is not the repo, and drop its .pth path
    env["PYTHONSAFEPATH"] = "1"
    return py, env_dir, env, tmp


def test_wheel_holds_the_package_data(wheel_venv):
    py, env_dir, env, tmp = wheel_venv
    code = (
        "import sys, json, saltplan, saltplan._data as d;"
        f"sys.path[:] = [p for p in sys.path if not p.startswith({str(ROOT)!r})];"
        "print(json.dumps({'pkg': saltplan.__file__, 'ions': str(d.counterion_dir())}))"
    )
    out = _run([str(py), "-c", code], cwd=tmp, env=env)
    assert out.returncode == 0, out.stderr[-2000:]
    info = json.loads(out.stdout)
    assert str(env_dir) in info["pkg"], info
    assert str(env_dir) in info["ions"], info
    assert list(Path(info["ions"]).glob("*.yaml")), "counterion YAML files missing from the wheel"


def test_wheel_smoke_commands(wheel_venv):
    py, env_dir, env, tmp = wheel_venv
    exe = env_dir / "bin" / "saltplan"
    out = _run([str(exe), "--version"], cwd=tmp, env=env)
    assert out.returncode == 0 and "saltplan" in out.stdout
    out = _run([str(exe), "parent", "CCN(CC)CC.Cl", "--json"], cwd=tmp, env=env)
    assert out.returncode == 0, out.stderr
    assert json.loads(out.stdout)["supplied_as"] == "hydrochloride"
    demo_out = tmp / "demo-out"
    out = _run([str(exe), "demo", "--out", str(demo_out)], cwd=tmp, env=env)
    assert out.returncode == 0, out.stderr[-3000:]
    assert any(demo_out.rglob("report.html")), "demo wrote no HTML report from the wheel"


def test_wheel_lists_every_data_file_and_template_of_the_package(wheel_venv):
    """Each non-Python file of saltplan/ (YAML tables, Jinja2 templates, READMEs) and each
    counterion library file is inside the wheel, at the same place."""
    import zipfile

    _py, _env_dir, _env, tmp = wheel_venv
    wheel = next(tmp.glob("saltplan-*.whl"))
    inside = set(zipfile.ZipFile(wheel).namelist())
    package = ROOT / "saltplan"
    wanted = {p.relative_to(ROOT).as_posix() for p in package.rglob("*")
              if p.is_file() and p.suffix not in (".py", ".pyc") and "__pycache__" not in p.parts}
    wanted |= {f"saltplan/_counterions/{p.name}" for p in (ROOT / "counterions").glob("*.yaml")}
    assert any(w.endswith("templates/decision.html.j2") for w in wanted)
    assert any(w.endswith("templates/portfolio.html.j2") for w in wanted)
    assert sorted(wanted - inside) == []
