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
