# The Python module against the CLI: the same scan and options give the same result.json
# (Result.to_dict), the same output folder (Result.write), the same error messages; arrays in,
# arrays out; progress and cancellation.
import json
import os
import re
import signal
import threading

import numpy as np
import pytest

import streakwright as sw
from conftest import run_cli

# Fast, deterministic retrieval settings (one thread, fixed seed, no bootstrap).
RETRIEVE_CLI = ["--engine", "ptychographic", "--iterations", "40", "--bootstrap", "0", "--threads", "1",
                "--seed", "7"]
RETRIEVE_PY = dict(engine="ptychographic", iterations=40, bootstrap=0, threads=1, seed=7)


def comparable(d):
    """result.json without the values that differ between two runs: wall times (any key with
    'seconds') and the time of the analysis (provenance.time_utc)."""
    if isinstance(d, dict):
        return {k: comparable(v) for k, v in d.items() if "seconds" not in k and k != "time_utc"}
    if isinstance(d, list):
        return [comparable(v) for v in d]
    return d


def cli_result(tmp_path, name, *args):
    out = tmp_path / name
    r = run_cli(*args, "--out", str(out), "--quiet")
    assert r.returncode in (0, 4), r.stderr
    with open(out / "result.json") as f:
        return json.load(f), out


def test_retrieve_to_dict_equals_cli_result(archive, tmp_path):
    path = archive["neon-150as"]
    expected, cli_out = cli_result(tmp_path, "cli", "retrieve", path, *RETRIEVE_CLI)
    res = sw.retrieve(sw.load_scan(path), **RETRIEVE_PY)
    got = res.to_dict()
    assert got["provenance"]["command"] == "retrieve"
    assert comparable(got) == comparable(expected)
    # The numbers a physicist reads first are there and finite.
    assert 100 < got["xuv"]["fwhm_as"] < 250
    # Arrays: the retrieved XUV peaks near t = 0 (time origin fixed at the intensity centroid).
    t, field = res.xuv_time_as, res.xuv_field
    assert t.shape == field.shape and field.dtype == np.complex128
    assert abs(t[np.argmax(np.abs(field))]) < 100
    assert res.measured_trace.shape == res.retrieved_trace.shape
    assert res.ir_time_fs.shape == res.ir_vector_potential_au.shape == res.ir_electric_field_au.shape
    # Result.write: the folder the CLI writes (same files; same result.json up to wall times).
    py_out = tmp_path / "py"
    res.write(str(py_out))
    assert sorted(os.listdir(py_out)) == sorted(os.listdir(cli_out))
    with open(py_out / "result.json") as f:
        assert comparable(json.load(f)) == comparable(expected)
    # The CLI's output-folder safety: never into the folder of an input (docs/cli.md).
    with pytest.raises(ValueError, match="input"):
        res.write(os.path.dirname(path))
    assert os.path.exists(path)
    # figure_format as the CLI's --figure-format: the same files with .svg figures.
    svg_out = tmp_path / "svg"
    res.write(str(svg_out), figure_format="svg")
    names = sorted(os.listdir(svg_out))
    assert [n[:-4] for n in names if n.endswith(".svg")] == [n[:-4] for n in sorted(os.listdir(cli_out)) if n.endswith(".png")]
    with pytest.raises(ValueError, match="figure_format"):
        res.write(str(tmp_path / "bad"), figure_format="gif")


def test_rabbitt_and_classify_to_dict_equal_cli_results(archive, tmp_path):
    path = archive["argon-rabbitt"]
    scan = sw.load_scan(path)
    assert scan.kind == "rabbitt" and scan.gas
    expected, _ = cli_result(tmp_path, "rb", "rabbitt", path)
    got = sw.rabbitt(scan).to_dict()
    assert comparable(got) == comparable(expected)
    assert got["rabbitt"]["sidebands"]
    expected, _ = cli_result(tmp_path, "cl", "classify", path, "--min-counts", "1000", "--ir-wavelength", "790")
    got = sw.classify(scan, min_counts=1000, ir_wavelength=790.0).to_dict()
    assert got["settings"]["ir_wavelength_nm"] == 790.0
    assert comparable(got) == comparable(expected)
    assert got["verdict"]["class"] == "train"


def test_rabbitt_echoes_the_energy_window(archive, tmp_path):
    path = archive["argon-rabbitt"]
    scan = sw.load_scan(path)
    lo, hi = scan.energy_eV[0] + 2.0, scan.energy_eV[-1] - 2.0
    expected, _ = cli_result(tmp_path, "rbw", "rabbitt", path, "--energy-window", f"{lo}:{hi}")
    got = sw.rabbitt(scan, energy_window=(lo, hi)).to_dict()
    assert comparable(got) == comparable(expected)
    window = got["preprocess"]
    assert window["window_source"] == "option"
    step = scan.energy_eV[1] - scan.energy_eV[0]
    assert lo - step <= window["window_lo_eV"] < window["window_hi_eV"] <= hi + step


def test_xuv_only_and_classify_retrieve_equal_cli_results(archive, tmp_path):
    xuv_only = archive["neon-xuv-only"]
    path = archive["argon-rabbitt"]
    expected, _ = cli_result(tmp_path, "rbx", "rabbitt", path, "--xuv-only", xuv_only)
    got = sw.rabbitt(sw.load_scan(path), xuv_only=sw.load_scan(xuv_only)).to_dict()
    assert got["settings"]["xuv_only"] == xuv_only
    assert comparable(got) == comparable(expected)
    path = archive["neon-150as"]
    expected, _ = cli_result(tmp_path, "clr", "classify", path, "--retrieve", "--engine", "ptychographic",
                             "--iterations", "20")
    res = sw.classify(sw.load_scan(path), retrieve=True, engine="ptychographic", iterations=20)
    assert comparable(res.to_dict()) == comparable(expected)
    assert res.xuv_field is not None and res.to_dict()["verdict"]["class"] == "isolated"


def test_bad_input_raises_value_error_with_the_cli_message(archive, tmp_path):
    missing = str(tmp_path / "missing.json")
    r = run_cli("retrieve", missing, "--out", str(tmp_path / "o"))
    assert r.returncode == 3
    with pytest.raises(ValueError) as e:
        sw.load_scan(missing)
    assert str(e.value) in r.stderr
    # An analysis refusing a scan: the message names the scan, as the CLI's does.
    streaking = archive["neon-150as"]
    r = run_cli("rabbitt", streaking, "--out", str(tmp_path / "rb"))
    assert r.returncode == 3
    with pytest.raises(ValueError) as e:
        sw.rabbitt(sw.load_scan(streaking))
    assert streaking in str(e.value) and str(e.value) in r.stderr
    scan, _ = sw.simulate("neon-150as", seed=2)
    with pytest.raises(ValueError, match="engine"):
        sw.retrieve(scan, engine="no-such-engine")


def test_retrieve_keywords_are_the_cli_options():
    """Every option of the CLI's `retrieve` is a keyword of sw.retrieve (its flag with '-' -> '_',
    the same default and checks: both come from RetrieveOptions::describe)."""
    helptext = run_cli("retrieve", "--help").stdout
    flags = set(re.findall(r"^  (?:-\w,)?--([a-z][a-z-]*)", helptext, re.M))  # first flag of a row
    # Not options of the analysis: the output folder and terminal (Result.write, figure_format
    # there) and the data-path policy (load_scan).
    not_analysis = {"help", "out", "quiet", "allow-outside-data", "figure-format"}
    keywords = {f.replace("-", "_") for f in flags - not_analysis}
    assert {"engine", "uncertainty", "satellite_start", "max_seconds", "lines"} <= keywords
    documented = set(re.findall(r"^  (\w+) = ", sw.retrieve.__doc__, re.M))
    assert keywords == documented
    scan, _ = sw.simulate("neon-150as", seed=8)
    fast = {**RETRIEVE_PY, "iterations": 5}
    got = sw.retrieve(scan, **fast, uncertainty="warm", satellite_start=False, lines="none").to_dict()
    assert got["settings"]["uncertainty"] == "warm"
    assert got["settings"]["satellite_start"] is False
    # Linearised replicas apply to a full-model headline only; on this CMA one the full bootstrap
    # runs and result.json says why.
    got = sw.retrieve(
        scan, **{**fast, "bootstrap": 2}, uncertainty="laplace", laplace_check=1,
        full_model_patience=5, satellite_start_margin=1.0, replica_satellite_margin=0.0,
    ).to_dict()
    assert got["settings"]["uncertainty"] == "laplace"
    assert got["settings"]["laplace_check_replicas"] == 1
    assert got["settings"]["full_model_patience"] == 5
    assert got["settings"]["satellite_start_margin"] == 1.0
    assert got["settings"]["replica_satellite_margin"] == 0.0
    assert got["bootstrap"]["method"].startswith("full (laplace not applicable")
    # An invalid value: ValueError naming the keyword (and the rule); a wrong type: TypeError.
    with pytest.raises(ValueError, match=r"uncertainty = 'lukewarm': expected full\|warm"):
        sw.retrieve(scan, **fast, uncertainty="lukewarm")
    with pytest.raises(ValueError, match="cma_phase_limit = 0: must be > 0 rad"):
        sw.retrieve(scan, **fast, cma_phase_limit=0.0)
    with pytest.raises(ValueError, match="full_model_patience = 0"):
        sw.retrieve(scan, **fast, full_model_patience=0)
    with pytest.raises(ValueError, match="satellite_start_margin = -1"):
        sw.retrieve(scan, **fast, satellite_start_margin=-1.0)
    with pytest.raises(ValueError, match="replica_satellite_margin = -0.5"):
        sw.retrieve(scan, **fast, replica_satellite_margin=-0.5)
    with pytest.raises(ValueError, match="lines"):
        sw.retrieve(scan, **fast, lines="2s,none")
    with pytest.raises(TypeError, match="bootstrap"):
        sw.retrieve(scan, **{**fast, "bootstrap": "many"})
    with pytest.raises(TypeError, match="uncertainty_method"):
        sw.retrieve(scan, **fast, uncertainty_method="warm")


@pytest.mark.parametrize("command", ["rabbitt", "classify"])
def test_rabbitt_and_classify_keywords_are_the_cli_options(command):
    """Every option of the CLI's `rabbitt` / `classify` is a keyword of the function of that name
    (documented with its default; both come from RabbittAnalysisOptions::describe and
    ClassifyAnalysisOptions::describe), besides the overrides and energy_window."""
    helptext = run_cli(command, "--help").stdout
    flags = set(re.findall(r"^  (?:-\w,)?--([a-z][a-z-]*)", helptext, re.M))
    not_described = {"help", "out", "quiet", "allow-outside-data", "figure-format", "gas",
                     "ir-wavelength", "energy-window", "xuv-only"}
    keywords = {f.replace("-", "_") for f in flags - not_described}
    documented = set(re.findall(r"^  (\w+) = ", getattr(sw, command).__doc__, re.M))
    assert keywords == documented
    scan, _ = sw.simulate("argon-rabbitt", seed=3)
    # Checked before any work: ValueError naming the keyword and the rule; TypeError for a
    # keyword that no option has.
    if command == "rabbitt":
        assert "no_rainbow = False" in sw.rabbitt.__doc__
        with pytest.raises(ValueError, match=r"window = 0.7: must be in \(0, 0.5\]"):
            sw.rabbitt(scan, window=0.7)
        with pytest.raises(ValueError, match=r"atomic_correction = 'maybe': expected auto\|none"):
            sw.rabbitt(scan, atomic_correction="maybe")
    else:
        with pytest.raises(ValueError, match="comparable_bursts = 1: must be >= 2"):
            sw.classify(scan, comparable_bursts=1)
        with pytest.raises(ValueError, match="isolated_max_satellite_ratio"):
            sw.classify(scan, isolated_max=0.9)  # above satellites_max (a rule between fields)
    with pytest.raises(TypeError, match="no_such_option"):
        getattr(sw, command)(scan, no_such_option=1)


def test_scan_from_arrays_round_trip_and_checks(archive):
    scan = sw.load_scan(archive["neon-150as"])
    assert scan.counts.shape == (len(scan.delay_fs), len(scan.energy_eV))
    again = sw.Scan.from_arrays(scan.counts, energy_eV=scan.energy_eV, delay_fs=scan.delay_fs, gas=scan.gas,
                                ir_wavelength_nm=scan.ir_wavelength_nm, kind="streaking", operator="R. Example")
    np.testing.assert_array_equal(again.counts, scan.counts)
    np.testing.assert_allclose(again.energy_eV, scan.energy_eV, rtol=1e-14)
    assert again.meta["extra"] == {"operator": "R. Example"}
    bad = scan.counts.copy()
    bad[3, 4] = -5.0
    with pytest.raises(ValueError, match="Scan.from_arrays"):
        sw.Scan.from_arrays(bad, energy_eV=scan.energy_eV, delay_fs=scan.delay_fs, gas=scan.gas,
                            ir_wavelength_nm=scan.ir_wavelength_nm)
    with pytest.raises(ValueError, match="shape"):
        sw.Scan.from_arrays(scan.counts.T, energy_eV=scan.energy_eV, delay_fs=scan.delay_fs)
    with pytest.raises(ValueError, match="ir_wavelength_nm"):
        sw.Scan.from_arrays(scan.counts, energy_eV=scan.energy_eV, delay_fs=scan.delay_fs, gas="Ne",
                            ir_wavelength_nm=-800.0)


def test_simulate_returns_scan_and_truth():
    scan, truth = sw.simulate("neon-150as", seed=5)
    assert truth["xuv"]["fwhm_as"] > 0
    assert scan.counts.ndim == 2 and scan.counts.sum() > 0
    with pytest.raises(ValueError, match="preset"):
        sw.simulate("no-such-preset")


def test_progress_callback_and_cancellation():
    scan, _ = sw.simulate("neon-150as", seed=6)
    seen = []
    sw.retrieve(scan, **{**RETRIEVE_PY, "iterations": 5}, progress=lambda stage, msg: seen.append((stage, msg)))
    assert seen and all(isinstance(s, str) for s, _ in seen)

    class Stop(Exception):
        pass

    def stop(stage, msg):
        raise Stop(stage)

    with pytest.raises(Stop):
        sw.retrieve(scan, **RETRIEVE_PY, progress=stop)
    # Ctrl-C while the engine runs (GIL released): SIGINT from another thread once the engine
    # has reported its first iteration; the next progress call raises KeyboardInterrupt.
    started, finished = threading.Event(), threading.Event()

    def ctrl_c():
        if started.wait(60) and not finished.is_set():
            os.kill(os.getpid(), signal.SIGINT)

    killer = threading.Thread(target=ctrl_c)
    killer.start()
    try:
        with pytest.raises(KeyboardInterrupt):
            sw.retrieve(scan, **{**RETRIEVE_PY, "iterations": 3000}, progress=lambda s, m: started.set())
    finally:
        finished.set()
        started.set()
        killer.join()
