"""The Python package against the command line: the `copyloop` binary built from the same
repository is the reference (identical documents for the same arguments and seed)."""

import json
import os
import signal
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import numpy as np
import pytest

import copyloop

ROOT = Path(__file__).resolve().parents[2]
GLAND = str(ROOT / "reactions" / "gland_loop.crn")
RECEPTOR = str(ROOT / "reactions" / "receptor_signal.crn")
BIN = os.environ.get("COPYLOOP_BIN", str(ROOT / "target" / "release" / "copyloop"))
# Keys that measure wall-clock time and so differ from run to run.
CLOCK = ("wall_seconds", "events_per_second")


def cli(*args):
    if not Path(BIN).exists():
        pytest.fail(f"the copyloop binary is missing at {BIN}: run `cargo build --release` first")
    out = subprocess.run([BIN, *args], capture_output=True, text=True)
    return out


def without_clock(text):
    doc = json.loads(text)
    for k in CLOCK:
        doc.pop(k, None)
    return doc


def test_check_equals_the_cli():
    net = copyloop.load(GLAND)
    c = net.check()
    out = cli("check", GLAND, "--json")
    assert out.returncode == 0
    assert c.to_json() == out.stdout
    doc = json.loads(out.stdout)
    assert c.species == [s["name"] for s in doc["species"]]
    assert c.stoichiometry.dtype == np.int64
    assert c.stoichiometry.shape == (len(c.species), len(c.reactions))
    assert c.stoichiometry.tolist() == doc["stoichiometry"]


@pytest.mark.parametrize("method", ["direct", "tau", "auto"])
@pytest.mark.parametrize("threads", [1, 2])
def test_simulate_equals_the_cli(method, threads):
    # 40 replicates span three blocks of the library's ensemble, so the block merge is tested.
    net = copyloop.load(GLAND)
    run = net.simulate(300, replicates=40, method=method, grid=11, seed=7, threads=threads)
    out = cli("simulate", GLAND, "--t-end", "300", "--replicates", "40", "--method", method,
              "--grid", "11", "--seed", "7", "--json")
    assert out.returncode == 0, out.stderr
    assert without_clock(run.to_json()) == without_clock(out.stdout)
    doc = json.loads(out.stdout)
    assert run.times.dtype == np.float64 and run.times.shape == (11,)
    assert run.mean.shape == (11, len(run.species)) and run.sd.shape == run.mean.shape
    for i, s in enumerate(run.species):
        assert run.mean[:, i].tolist() == doc["grid"][s]["mean"]
        assert run.sd[:, i].tolist() == doc["grid"][s]["sd"]


def test_ode_equals_the_cli():
    run = copyloop.load(GLAND).simulate(600, method="ode", grid=21)
    out = cli("simulate", GLAND, "--t-end", "600", "--method", "ode", "--grid", "21", "--json")
    assert without_clock(run.to_json()) == without_clock(out.stdout)
    assert run.mean.shape == (21, len(run.species))


def test_steady_equals_the_cli():
    out = cli("steady", GLAND, "--json")
    assert copyloop.load(GLAND).steady().to_json() == out.stdout


def test_to_pandas_long_form():
    pd = pytest.importorskip("pandas")
    run = copyloop.load(GLAND).simulate(100, replicates=3, grid=5, seed=1)
    df = run.to_pandas()
    assert isinstance(df, pd.DataFrame)
    assert list(df.columns) == ["time", "species", "mean", "sd"]
    assert len(df) == 5 * len(run.species)
    h = df[df.species == "H"]
    assert h["mean"].tolist() == run.mean[:, run.species.index("H")].tolist()


def test_network_error_has_the_cli_message(tmp_path):
    bad = tmp_path / "bad.crn"
    bad.write_text("volume 1 pL\nspecies A = 3\nA -> @ rate kk\n")
    out = cli("check", str(bad))
    assert out.returncode == 2
    with pytest.raises(copyloop.NetworkError) as e:
        copyloop.load(str(bad))
    assert str(e.value).strip() == out.stderr.strip()
    assert e.value.file == str(bad)
    assert e.value.line == 3
    assert e.value.column >= 1
    assert f"{bad}:3:{e.value.column}" in out.stderr


def test_parse_reports_its_name():
    with pytest.raises(copyloop.NetworkError) as e:
        copyloop.parse("species A = 1\nA -> ", name="inline.crn")
    assert e.value.file == "inline.crn" and e.value.line == 2


def test_bad_options_raise_value_error():
    net = copyloop.load(GLAND)
    with pytest.raises(ValueError):
        net.simulate(10, method="euler")
    with pytest.raises(ValueError):
        net.simulate(10, replicates=0)
    with pytest.raises(ValueError):
        net.simulate(-5)
    with pytest.raises(ValueError):
        net.simulate(10, method="tau", epsilon=-1)
    with pytest.raises(ValueError):
        net.with_params(kon_g="2e7 /furlong")
    with pytest.raises(OSError):
        copyloop.load(str(ROOT / "no-such-file.crn"))


def test_with_params_equals_rewriting_the_file():
    text = Path(GLAND).read_text()
    assert "param kon_g = 2e6 /M/s" in text
    rewritten = copyloop.parse(text.replace("param kon_g = 2e6 /M/s", "param kon_g = 2e7 /M/s"),
                               name=GLAND)
    base = copyloop.load(GLAND)
    for changed in (base.with_params(kon_g="2e7 /M/s"), base.with_params(kon_g=2e7)):
        a = changed.simulate(200, replicates=5, grid=5, seed=3, threads=1)
        b = rewritten.simulate(200, replicates=5, grid=5, seed=3, threads=1)
        assert without_clock(a.to_json()) == without_clock(b.to_json())
        assert changed.steady().to_json() == rewritten.steady().to_json()
    # A unit of the wrong dimension is refused, not converted.
    with pytest.raises(copyloop.NetworkError):
        base.with_params(kon_g="3 nM")


def test_ctrl_c_raises_keyboard_interrupt():
    script = textwrap.dedent(f"""
        import sys, copyloop
        net = copyloop.load({GLAND!r})
        print("ready", flush=True)
        try:
            net.simulate(2000, replicates=10**8, threads=1)
        except KeyboardInterrupt:
            print("interrupted", flush=True)
            sys.exit(0)
        print("finished", flush=True)
    """)
    p = subprocess.Popen([sys.executable, "-c", script], stdout=subprocess.PIPE, text=True)
    assert p.stdout.readline().strip() == "ready"
    time.sleep(1.0)
    p.send_signal(signal.SIGINT)
    out, _ = p.communicate(timeout=120)
    assert p.returncode == 0
    assert out.strip() == "interrupted"


def without_clock_anywhere(value):
    """The document with every wall-clock key removed, at any depth (noise keeps one per
    volume)."""
    if isinstance(value, dict):
        return {k: without_clock_anywhere(v) for k, v in value.items() if k not in CLOCK}
    if isinstance(value, list):
        return [without_clock_anywhere(v) for v in value]
    return value


def same_document(python_json, cli_stdout):
    return without_clock_anywhere(json.loads(python_json)) == without_clock_anywhere(
        json.loads(cli_stdout))


@pytest.mark.parametrize("threads", [1, 2])
def test_reconcile_equals_the_cli(threads):
    net = copyloop.load(GLAND)
    r = net.reconcile(replicates=6, burn_in=600, t_end="40 min", observe=["H=2nM±0.2nM"],
                      seed=11, threads=threads)
    out = cli("reconcile", GLAND, "--replicates", "6", "--burn-in", "600", "--t-end", "40 min",
              "--observe", "H=2nM±0.2nM", "--seed", "11", "--json")
    assert out.returncode == 0, out.stderr
    assert same_document(r.to_json(), out.stdout)
    doc = json.loads(out.stdout)
    assert r.replicates == 6 and r.seed == 11
    assert len(r.motifs) == len(doc["motifs"]) >= 1
    for arr in (r.ensemble, r.langmuir, r.tqssa, r.ode):
        assert arr.dtype == np.float64 and arr.shape == (len(r.motifs),)
    assert r.ensemble_ci95.shape == (len(r.motifs), 2)
    for i, m in enumerate(doc["motifs"]):
        assert r.ensemble[i] == m["ensemble"]["mean_per_s"]
        assert r.ensemble_ci95[i].tolist() == m["ensemble"]["ci95"]
        assert r.langmuir[i] == m["predicted"]["langmuir_per_s"]
        assert r.motifs[i].verdict == m["verdict"] in ("agrees", "differs", "undecided")
    assert [o["name"] for o in r.observations] == ["H"]


def test_reconcile_observe_dict_equals_list():
    net = copyloop.load(GLAND)
    kw = dict(replicates=2, burn_in=300, t_end=900, seed=2, threads=1)
    a = net.reconcile(observe={"H": "2nM+-0.2nM"}, **kw)
    b = net.reconcile(observe=["H=2nM+-0.2nM"], **kw)
    assert without_clock_anywhere(a.document) == without_clock_anywhere(b.document)


def test_reconcile_to_pandas():
    pd = pytest.importorskip("pandas")
    r = copyloop.load(GLAND).reconcile(replicates=2, burn_in=300, t_end=900, seed=1)
    df = r.to_pandas()
    assert isinstance(df, pd.DataFrame) and len(df) == len(r.motifs)
    assert df["ensemble"].tolist() == r.ensemble.tolist()
    assert df["verdict"].tolist() == [m.verdict for m in r.motifs]


def test_noise_equals_the_cli():
    net = copyloop.load(RECEPTOR)
    n = net.noise(replicates=8, burn_in=20, t_end=200, volumes=["1fL", "4 fL"], seed=5)
    out = cli("noise", RECEPTOR, "--replicates", "8", "--burn-in", "20", "--t-end", "200",
              "--volumes", "1fL,4 fL", "--seed", "5", "--json")
    assert out.returncode == 0, out.stderr
    assert same_document(n.to_json(), out.stdout)
    doc = json.loads(out.stdout)
    assert [v.volume_l for v in n.volumes] == [v["volume_l"] for v in doc["volumes"]]
    for v, dv in zip(n.volumes, doc["volumes"]):
        assert v.species == list(dv["species"])
        assert v.mean.dtype == np.float64 and v.mean.shape == (len(v.species),)
        assert v.cv_ci95.shape == (len(v.species), 2)
        assert v.mean.tolist() == [dv["species"][s]["mean"] for s in v.species]
        assert v.fano.tolist() == [dv["species"][s]["fano"] for s in v.species]


def test_exact_states_matches_the_cli_and_zero_skips_the_exact_law():
    net = copyloop.load(RECEPTOR)
    for cap in ("0", "50000"):
        n = net.noise(replicates=4, burn_in=20, t_end=100, seed=2, exact_states=int(cap))
        out = cli("noise", RECEPTOR, "--replicates", "4", "--burn-in", "20", "--t-end", "100",
                  "--seed", "2", "--exact-states", cap, "--json")
        assert out.returncode == 0, out.stderr
        assert same_document(n.to_json(), out.stdout)
    skipped = json.loads(net.noise(replicates=4, burn_in=20, t_end=100, exact_states=0).to_json())
    assert all(s["exact_mean"] is None for s in skipped["volumes"][0]["species"].values())
    r = net.reconcile(replicates=4, burn_in=20, t_end=100, seed=2, exact_states=0)
    out = cli("reconcile", RECEPTOR, "--replicates", "4", "--burn-in", "20", "--t-end", "100",
              "--seed", "2", "--exact-states", "0", "--json")
    assert out.returncode == 0, out.stderr
    assert same_document(r.to_json(), out.stdout)


def test_noise_to_pandas():
    pd = pytest.importorskip("pandas")
    n = copyloop.load(RECEPTOR).noise(replicates=3, burn_in=20, t_end=100, seed=1)
    df = n.to_pandas()
    assert isinstance(df, pd.DataFrame)
    assert df["species"].tolist() == n.volumes[0].species
    assert df["mean"].tolist() == n.volumes[0].mean.tolist()


# Immigration–death: 0 -> A at rate k, A -> 0 at rate g·A. Its stationary law is Poisson with
# mean k/g, and from A(0) = 0 the law at time t is Poisson with mean (k/g)(1 − e^(−g·t))
# (Gardiner, Handbook of Stochastic Methods, the birth–death master equation [M]).
BIRTH_DEATH = """volume 1 pL
species A = 0 molecules
param k = 4       # bare: the stochastic constant, molecules per second
param g = 0.5 /s
step make  0 -> A @ k
step decay A -> 0 @ g
"""


def poisson(mean, n):
    from math import exp, lgamma, log
    return np.array([exp(i * log(mean) - mean - lgamma(i + 1)) if mean > 0 else float(i == 0)
                     for i in range(n)])


def test_distribution_equals_the_cli_and_the_poisson_law(tmp_path):
    path = tmp_path / "birth_death.crn"
    path.write_text(BIRTH_DEATH)
    d = copyloop.load(str(path)).distribution(t_end=3, grid=4, stationary=True)
    out = cli("distribution", str(path), "--t-end", "3", "--grid", "4", "--stationary", "--json")
    assert out.returncode == 0, out.stderr
    assert same_document(d.to_json(), out.stdout)
    assert d.times.tolist() == [0.0, 1.0, 2.0, 3.0]
    law = d.species["A"]
    assert law.mean.dtype == np.float64 and law.mean.shape == (4,)
    assert law.marginal.shape[0] == 4
    # Every probability is within the reported ℓ¹ bound of the exact law.
    for i, t in enumerate(d.times):
        exact = poisson(8.0 * (1 - np.exp(-0.5 * t)), law.marginal.shape[1])
        assert np.abs(law.marginal[i] - exact).sum() <= d.truncation_error + 1e-9
    st = d.stationary.species["A"]["marginal"]
    assert np.abs(st - poisson(8.0, len(st))).sum() <= d.stationary.truncation_error + 1e-9
    assert abs(d.stationary.fluxes["make"] - 4.0) < 1e-6


def test_distribution_to_pandas(tmp_path):
    pd = pytest.importorskip("pandas")
    d = copyloop.parse(BIRTH_DEATH, name="bd.crn").distribution(t_end=2, grid=3)
    df = d.to_pandas()
    assert list(df.columns) == ["time", "species", "mean", "variance", "sd", "fano", "p_zero"]
    assert df["mean"].tolist() == d.species["A"].mean.tolist()
    m = d.to_pandas(marginals=True)
    assert list(m.columns) == ["time", "species", "count", "probability"]
    assert m["probability"].sum() == pytest.approx(3.0, abs=1e-5)


def test_analyses_refuse_bad_options():
    net = copyloop.load(GLAND)
    with pytest.raises(ValueError) as e:
        net.reconcile(observe=["H=lots"])
    assert str(e.value).startswith("observe H=lots: ")
    with pytest.raises(ValueError) as e:
        net.reconcile(fit="kon_g")
    assert "--" not in str(e.value) and "observe" in str(e.value)
    with pytest.raises(ValueError):
        net.reconcile(replicates=0)
    with pytest.raises(ValueError):
        net.reconcile(t_end="3 nM")
    with pytest.raises(ValueError):
        net.noise(volumes=["3 nM"])
    bd = copyloop.parse(BIRTH_DEATH, name="bd.crn")
    with pytest.raises(ValueError):
        bd.distribution()
    with pytest.raises(ValueError):
        bd.distribution(t_end=1, species=["Z"])
    with pytest.raises(ValueError):
        bd.distribution(t_end=1, grid=1)
    with pytest.raises(ValueError):
        bd.distribution(t_end=1, max_states=3)


def test_stubs_and_docstrings_cover_every_public_name():
    pkg = Path(copyloop.__file__).parent
    assert (pkg / "py.typed").exists()
    stub = (pkg / "__init__.pyi").read_text()
    for name in copyloop.__all__:
        obj = getattr(copyloop, name)
        assert (f"class {name}" in stub) or (f"def {name}(" in stub), name
        assert obj.__doc__ and obj.__doc__.strip(), name
    for cls in (copyloop.Network, copyloop.Simulation, copyloop.Reconciliation,
                copyloop.Noise, copyloop.Distribution, copyloop.Check, copyloop.Steady):
        for attr, member in vars(cls).items():
            if attr.startswith("_") or not callable(member) and not isinstance(member, property):
                continue
            assert f"def {attr}(" in stub, f"{cls.__name__}.{attr}"
            assert member.__doc__ and member.__doc__.strip(), f"{cls.__name__}.{attr}"


NOTEBOOK = str(ROOT / "python" / "examples" / "notebook.py")
# Runs the example with matplotlib made unimportable (a None entry in sys.modules).
WITHOUT_MATPLOTLIB = ("import runpy, sys; sys.modules['matplotlib'] = None; "
                      "sys.modules['matplotlib.pyplot'] = None; "
                      f"runpy.run_path({NOTEBOOK!r}, run_name='__main__')")


@pytest.mark.parametrize("matplotlib", [False, True])
def test_notebook_example_runs_as_a_script(tmp_path, matplotlib):
    if matplotlib:
        pytest.importorskip("matplotlib")
        args = [sys.executable, NOTEBOOK]
    else:
        args = [sys.executable, "-c", WITHOUT_MATPLOTLIB]
    env = dict(os.environ, MPLBACKEND="Agg", COPYLOOP_EXAMPLE_OUT=str(tmp_path),
               COPYLOOP_EXAMPLE_REPLICATES="8")
    out = subprocess.run(args, capture_output=True, text=True, env=env, timeout=600)
    assert out.returncode == 0, out.stderr
    assert "verdict: " in out.stdout
    assert "R/H (receptor, output signal)" in out.stdout
    figure = tmp_path / "gland_loop_time_course.png"
    if matplotlib:
        assert figure.stat().st_size > 0
    else:
        assert "matplotlib is not installed" in out.stdout and not figure.exists()


def test_ctrl_c_during_noise_raises_keyboard_interrupt_between_replicates():
    # A million replicates would run for hours: only a stop between replicates ends it
    # within the time limit (before, Ctrl-C was seen only when the run returned).
    script = textwrap.dedent(f"""
        import sys, copyloop
        net = copyloop.load({RECEPTOR!r})
        print("ready", flush=True)
        try:
            net.noise(replicates=10**6, burn_in=10, t_end=20000, threads=1)
        except KeyboardInterrupt:
            print("interrupted", flush=True)
            sys.exit(0)
        print("finished", flush=True)
    """)
    p = subprocess.Popen([sys.executable, "-c", script], stdout=subprocess.PIPE, text=True)
    assert p.stdout.readline().strip() == "ready"
    time.sleep(0.5)
    p.send_signal(signal.SIGINT)
    out, _ = p.communicate(timeout=120)
    assert p.returncode == 0
    assert out.strip() == "interrupted"
