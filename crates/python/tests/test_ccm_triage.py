"""The Python module against the command line on the same input, and against outside facts.

Every comparison runs `ccm-triage` (the binary from the same commit) and the module on the
same bytes and settings, and requires equal values in equal order.
"""

import json
import os
import pathlib
import signal
import subprocess
import sys
import threading
import time

import numpy as np
import pandas as pd
import pytest
import scipy
import scipy.stats

import ccm_triage
from ccm_triage import TriageError, read_table

from conftest import DEMO, QUICK, QUICK_FLAGS, REPO, SMALL_SPEC

TABLES = ["labels", "curves", "features", "embedding", "lags", "surrogates"]


def demo_frame():
    # Exactly the values in the file: pandas 3 reads floats correctly rounded by default;
    # older versions need float_precision="round_trip".
    return pd.read_csv(DEMO, **ccm_triage._EXACT_FLOATS)


def cli_tables(out):
    return {t: read_table((out / f"{t}.csv").read_bytes()) for t in TABLES}


def assert_same_tables(result, out):
    files = cli_tables(out)
    for t in TABLES:
        pd.testing.assert_frame_equal(getattr(result, t), files[t], check_exact=True,
                                      obj=t)
        assert result.csv_bytes(f"{t}.csv") == (out / f"{t}.csv").read_bytes(), t


@pytest.fixture(scope="module")
def demo_run(tmp_path_factory):
    """The demo table scanned by the command line (from the module's CSV bytes) and by the
    module (from a DataFrame), seed 7."""
    d = tmp_path_factory.mktemp("demo")
    df = demo_frame()
    data = d / "sound.csv"
    data.write_bytes(ccm_triage.table_csv(df))
    out = d / "cli"
    ccm_triage_cli = _cli()
    ccm_triage_cli("scan", data, "--out", out, "--seed", "7", *QUICK_FLAGS)
    result = ccm_triage.scan(df, seed=7, **QUICK)
    return df, data, out, result


def _cli():
    from conftest import _binary

    def run(*args):
        subprocess.run([_binary(), "--quiet", *map(str, args)], check=True,
                       capture_output=True)

    return run


def test_dataframe_scan_equals_the_command_line(demo_run):
    df, data, out, result = demo_run
    assert_same_tables(result, out)
    assert result.run["input"]["sha256"] == json.loads((out / "run.json").read_text())[
        "input"]["sha256"]
    assert list(result.labels.columns[:4]) == ["driver", "response", "p_causal", "verdict"]
    assert "unfamiliarity_threshold" in result.labels.columns
    assert len(result.labels) == 7 * 6
    assert sum(result.counts.values()) == 42


def test_table_csv_round_trips_the_demo_file_values():
    df = demo_frame()
    again = pd.read_csv(__import__("io").BytesIO(ccm_triage.table_csv(df)),
                        **ccm_triage._EXACT_FLOATS)
    pd.testing.assert_frame_equal(df, again, check_exact=True)


def test_the_readme_example_equals_the_command_line_on_the_demo_file(tmp_path, cli):
    """The README's notebook lines (default settings, seed 7) against `ccm-triage scan
    demo-data/sound.csv --seed 7`: every CSV file byte for byte."""
    out = tmp_path / "cli"
    cli("scan", DEMO, "--out", out, "--seed", "7")
    result = ccm_triage.scan(pd.read_csv("demo-data/sound.csv" if pathlib.Path(
        "demo-data/sound.csv").exists() else DEMO), seed=7)
    assert_same_tables(result, out)
    assert result.run["settings"] == json.loads((out / "run.json").read_text())["settings"]
    assert result.run["cycles"] == json.loads((out / "run.json").read_text())["cycles"]


def test_dict_and_structured_array_inputs_give_the_dataframes_result(demo_run):
    df, _, _, result = demo_run
    as_dict = {c: df[c].to_numpy() for c in df.columns}
    from_dict = ccm_triage.scan(as_dict, seed=7, **QUICK)
    for t in TABLES:
        pd.testing.assert_frame_equal(getattr(from_dict, t), getattr(result, t),
                                      check_exact=True)
    arr = df.to_records(index=False)
    from_arr = ccm_triage.scan(arr, seed=7, **QUICK)
    pd.testing.assert_frame_equal(from_arr.labels, result.labels, check_exact=True)


def test_path_input_and_write_give_the_command_lines_files(tmp_path, cli):
    out_cli = tmp_path / "cli"
    cli("scan", DEMO, "--out", out_cli, "--seed", "3", *QUICK_FLAGS)
    result = ccm_triage.scan(str(DEMO), seed=3, **QUICK)
    out_py = tmp_path / "py"
    result.write(out_py)
    names = sorted(p.name for p in out_cli.iterdir())
    assert names == sorted(p.name for p in out_py.iterdir())
    assert "report.html" in names and "run.json" in names
    assert "plots" in names
    for name in names:
        if name == "run.json":
            continue
        if name == "plots":
            figures = sorted(p.name for p in (out_cli / name).iterdir())
            assert figures == sorted(p.name for p in (out_py / name).iterdir())
            for f in figures:
                assert (out_py / name / f).read_bytes() == (out_cli / name / f).read_bytes(), f
            continue
        assert (out_py / name).read_bytes() == (out_cli / name).read_bytes(), name
    a, b = (json.loads((o / "run.json").read_text()) for o in (out_cli, out_py))
    for r in (a, b):
        # The process that wrote each file: its command line, start time and timing.
        r.pop("timing")
        r.pop("invocation")
    assert a == b
    # The round trip: the files written read back as the result's tables.
    for t in TABLES:
        pd.testing.assert_frame_equal(read_table((out_py / f"{t}.csv").read_bytes()),
                                      getattr(result, t), check_exact=True)
    # A second write replaces the files in place.
    result.write(out_py)
    assert (out_py / "labels.csv").read_bytes() == (out_cli / "labels.csv").read_bytes()


def test_write_never_replaces_an_input(tmp_path):
    data = tmp_path / "labels.csv"
    data.write_bytes(DEMO.read_bytes())
    result = ccm_triage.scan(str(data), **QUICK)
    with pytest.raises(TriageError):
        result.write(tmp_path)
    assert data.read_bytes() == DEMO.read_bytes()


def test_missing_values_are_counted_and_match_the_command_line(tmp_path, cli):
    df = demo_frame()
    df.loc[[10, 11, 50], "kelp_cover"] = np.nan
    df.loc[200, "wind_index"] = None
    data = tmp_path / "gappy.csv"
    data.write_bytes(ccm_triage.table_csv(df))
    assert b",," in data.read_bytes()
    out = tmp_path / "cli"
    cli("scan", data, "--out", out, *QUICK_FLAGS)
    result = ccm_triage.scan(df, **QUICK)
    assert result.run["input"]["missing_cells_total"] == 4
    assert_same_tables(result, out)


def test_label_of_curves_equals_the_command_line(demo_run, tmp_path, cli):
    _, _, out, result = demo_run
    out_label = tmp_path / "label"
    cli("label", out / "curves.csv", "--out", out_label)
    relabelled = ccm_triage.label(result.curves)
    for t in ["labels", "curves", "features"]:
        pd.testing.assert_frame_equal(getattr(relabelled, t),
                                      read_table((out_label / f"{t}.csv").read_bytes()),
                                      check_exact=True)
    assert relabelled.embedding is None
    assert set(relabelled.labels["model_head"]) == {"curve-only"}


def error_text(p):
    assert p.returncode == 1
    assert p.stderr.startswith("error: ")
    return p.stderr[len("error: "):].rstrip("\n")


def test_bad_files_raise_triage_error_with_the_command_lines_message(tmp_path, cli):
    bad = tmp_path / "bad.csv"
    bad.write_text("t,a,b\n0,1,2\n1,x,3\n2,4,5\n")
    with pytest.raises(TriageError) as e:
        ccm_triage.scan(str(bad))
    assert isinstance(e.value, ValueError)
    assert str(e.value) == error_text(cli("scan", bad, "--out", tmp_path / "o", check=False))


def test_bad_frames_and_options_raise_value_errors_with_the_command_lines_message(tmp_path,
                                                                                  cli):
    df = pd.DataFrame({"a": [1.0, 2.0, 3.0, 4.0]})
    data = tmp_path / "one.csv"
    data.write_bytes(ccm_triage.table_csv(df))
    expected = error_text(cli("scan", data, "--out", tmp_path / "o", check=False))
    with pytest.raises(ValueError) as e:
        ccm_triage.scan(df)
    # The same message, the table named as a DataFrame instead of by its path.
    assert str(e.value) == expected.replace(str(data), "<DataFrame>")
    expected = error_text(cli("scan", DEMO, "--out", tmp_path / "o", "--sizes", "80,40",
                              check=False))
    with pytest.raises(TriageError) as e:
        ccm_triage.scan(demo_frame(), sizes=[80, 40])
    assert str(e.value) == expected
    with pytest.raises(TriageError) as e:
        ccm_triage.scan(demo_frame(), review_band=(0.6, 0.8))
    assert str(e.value) == error_text(cli("scan", DEMO, "--out", tmp_path / "o",
                                          "--review-band", "0.6,0.8", check=False))
    with pytest.raises(TriageError, match="different lengths"):
        ccm_triage.scan({"a": np.arange(5.0), "b": np.arange(4.0)})
    with pytest.raises(TypeError):
        ccm_triage.scan([1, 2, 3])


def sigint_once():
    """A progress callback that sends this process one SIGINT (what Ctrl-C sends) as soon as
    the run reports progress, so the signal always arrives while the run is working."""
    sent = []

    def callback(stage, done, total):
        if not sent:
            sent.append(stage)
            os.kill(os.getpid(), signal.SIGINT)

    return callback


def test_ctrl_c_raises_keyboard_interrupt_and_writes_nothing(tmp_path):
    df = demo_frame()
    with pytest.raises(KeyboardInterrupt):
        ccm_triage.scan(df, replicates=400, progress=sigint_once())
    out = tmp_path / "model"
    with pytest.raises(KeyboardInterrupt):
        ccm_triage.train(SMALL_SPEC, out, replicates=10, progress=sigint_once())
    assert not out.exists()
    out = tmp_path / "sims"
    with pytest.raises(KeyboardInterrupt):
        ccm_triage.simulate(SMALL_SPEC, out, progress=sigint_once())
    assert not out.exists()


def test_ctrl_c_while_the_engine_runs_without_the_gil():
    # A timer thread sends SIGINT while the calling thread waits on the engine; a scan this
    # size takes several seconds, a stop at the next work unit a fraction of that.
    started = time.monotonic()
    timer = threading.Timer(0.3, os.kill, (os.getpid(), signal.SIGINT))
    timer.start()
    try:
        with pytest.raises(KeyboardInterrupt):
            ccm_triage.scan(demo_frame(), replicates=1000)
    finally:
        timer.cancel()
        timer.join()
    assert time.monotonic() - started < 60


def test_progress_callback_and_bar(capsys):
    calls = []
    ccm_triage.scan(demo_frame(), progress=lambda s, d, t: calls.append((s, d, t)), **QUICK)
    assert calls and calls[-1] == ("cross maps", 42, 42)
    assert all(c[1] <= c[2] for c in calls)
    result = ccm_triage.scan(demo_frame(), progress=True, **QUICK)
    err = capsys.readouterr().err
    assert "cross maps" in err and "work: 7 variables x 300 rows" in err
    assert result.notes and result.notes[0].startswith("work: ")


def test_defaults_are_the_command_lines():
    import inspect

    d = ccm_triage._native.defaults()
    sig = inspect.signature(ccm_triage.scan)
    for name in ["seed", "dim", "max_dim", "delay", "replicates", "theiler_window", "max_lag",
                 "surrogates", "period", "no_seasonal_surrogates"]:
        assert sig.parameters[name].default == d[name], name
    assert str(sig.parameters["sizes"].default) == d["sizes"]
    assert d["review_band"] == "0.3,0.7"


def test_model_card_equals_the_command_line(cli):
    card = ccm_triage.model_card()
    assert card == json.loads(cli("model-card", "--json").stdout)
    assert ccm_triage.model_card(markdown=True) + "\n" == cli("model-card").stdout


def test_simulate_equals_the_command_line(tmp_path, cli):
    out = tmp_path / "sims"
    cli("simulate", SMALL_SPEC, "--out", out)
    sims = ccm_triage.simulate(SMALL_SPEC)
    truth = read_table((out / "truth.csv").read_bytes(), kinds=False)
    pd.testing.assert_frame_equal(sims["truth"], truth, check_exact=True)
    first = truth["system"][0]
    pd.testing.assert_frame_equal(
        sims["systems"][first],
        read_table((out / f"{first}.csv").read_bytes(), kinds=False), check_exact=True)
    written = tmp_path / "py"
    ccm_triage.simulate(SMALL_SPEC, written)
    assert (written / "truth.csv").read_bytes() == (out / "truth.csv").read_bytes()


def test_without_pandas_tables_are_structured_arrays():
    code = (
        "import sys; sys.modules['pandas'] = None\n"
        "import numpy as np, ccm_triage\n"
        "assert not ccm_triage.HAVE_PANDAS\n"
        f"r = ccm_triage.scan({{'a': np.sin(np.arange(120) * 0.3),"
        f" 'b': np.cos(np.arange(120) * 0.7)}}, replicates=5, surrogates=3, sizes=4)\n"
        "assert isinstance(r.labels, np.ndarray) and r.labels.dtype.names[0] == 'driver'\n"
        "assert r.labels['p_causal'].dtype == np.float64 and len(r.labels) == 2\n"
        "assert r.curves['library_size'].dtype == np.int64\n"
        "print('ok')\n"
    )
    p = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True)
    assert p.returncode == 0, p.stderr
    assert p.stdout.strip() == "ok"


def test_cross_map_skill_is_scipys_pearson_r_of_a_hand_made_cross_map():
    """Outside check: a cross map small enough to work by hand.

    Simplex weights exp(-d_i/d_1) over the E+1 nearest neighbours follow Sugihara & May
    (1990, Nature 344:734); with E = 1 the state at t is the value x(t) itself, so the
    neighbours and estimates below are computed directly. The skill must be Pearson's r of
    estimates against observations as scipy.stats.pearsonr computes it (scipy version in the
    assertion message; pinned in requirements.txt).
    """
    response = np.array([0.11, 0.52, 0.23, 0.94, 0.37, 0.71, 0.30, 0.86, 0.45, 0.63])
    driver = np.array([1.3, 0.2, 2.9, 1.1, 3.8, 0.7, 2.2, 4.1, 0.9, 3.3])
    library = list(range(10))
    est, skill = ccm_triage.cross_map(response, driver, e=1, tau=1, theiler=0,
                                      library=library)
    by_hand = np.empty(10)
    for t in range(10):
        others = [u for u in library if u != t]
        d = np.abs(response[others] - response[t])
        nearest = np.argsort(d, kind="stable")[:2]
        w = np.exp(-d[nearest] / d[nearest[0]])
        by_hand[t] = np.sum(w * driver[np.array(others)[nearest]]) / np.sum(w)
    np.testing.assert_allclose(est, by_hand, rtol=1e-12)
    r = scipy.stats.pearsonr(est, driver).statistic
    assert skill == pytest.approx(r, abs=1e-12), f"scipy {scipy.__version__}"


def test_train_and_evaluate_equal_the_command_line(tmp_path, cli):
    flags = ["--replicates", "10", "--surrogates", "5", "--sizes", "5"]
    cli("train", SMALL_SPEC, "--out", tmp_path / "cli-model", *flags)
    card = ccm_triage.train(SMALL_SPEC, tmp_path / "py-model", **QUICK)
    for name in ["model.bin", "model-card.json", "training-set.csv", "skipped-systems.csv"]:
        assert (tmp_path / "py-model" / name).read_bytes() == \
            (tmp_path / "cli-model" / name).read_bytes(), name
    assert card == json.loads((tmp_path / "cli-model" / "model-card.json").read_text())
    model = tmp_path / "py-model" / "model.bin"
    cli("evaluate", "--model", model, SMALL_SPEC, "--out", tmp_path / "cli-eval", *flags)
    e = ccm_triage.evaluate(SMALL_SPEC, model=model, out=tmp_path / "py-eval", **QUICK)
    for name in ["predictions.csv", "evaluated-set.csv", "metrics.json"]:
        assert (tmp_path / "py-eval" / name).read_bytes() == \
            (tmp_path / "cli-eval" / name).read_bytes(), name
    pd.testing.assert_frame_equal(
        e["predictions"], read_table((tmp_path / "cli-eval" / "predictions.csv").read_bytes()),
        check_exact=True)
    assert e["metrics"] == json.loads((tmp_path / "cli-eval" / "metrics.json").read_text())
    assert "rule of thumb" in e["summary"]


def test_a_semicolon_export_and_a_pair_choice_equal_the_command_line(tmp_path, cli):
    # The demo table written as a spreadsheet export: semicolons and decimal commas.
    text = DEMO.read_text().replace(",", ";").replace(".", ",")
    data = tmp_path / "export.csv"
    data.write_text(text)
    out = tmp_path / "cli"
    cli("scan", data, "--out", out, "--delimiter", ";", "--decimal-comma",
        "--drivers", "sandeel_index,wind_index", "--responses", "puffin_chicks", *QUICK_FLAGS)
    result = ccm_triage.scan(str(data), delimiter=";", decimal_comma=True,
                             drivers=["sandeel_index", "wind_index"],
                             responses="puffin_chicks", **QUICK)
    assert_same_tables(result, out)
    assert sorted(zip(result.labels["driver"], result.labels["response"])) == [
        ("sandeel_index", "puffin_chicks"), ("wind_index", "puffin_chicks")]
    assert result.run["selection"]["drivers"] == ["sandeel_index", "wind_index"]
    # The reading options describe a file, not data already in memory.
    with pytest.raises(TriageError, match="delimiter"):
        ccm_triage.scan(demo_frame(), delimiter=";", **QUICK)
    with pytest.raises(TriageError, match="uneven"):
        ccm_triage.scan(str(data), delimiter=";", decimal_comma=True, uneven_steps="sometimes",
                        **QUICK)
