"""The HTML report: what it says, that it reads as words, and that a real browser draws it."""

import html
import re
import shutil
import subprocess
from dataclasses import replace

import numpy as np
import pytest

from pvsource.checks import Check
from pvsource.demo import demo_system, synthetic_weather
from pvsource.report import iv_curves, write_report
from pvsource.report_page import render_page
from pvsource.season import run_season


@pytest.fixture(scope="module")
def winter_run():
    # January and February of the demo: the bank empties and load goes unmet.
    system = demo_system()
    weather = synthetic_weather(system)
    weather = weather[weather.index.month <= 2]
    return system, weather, run_season(system, weather)


@pytest.fixture(scope="module")
def written(winter_run, tmp_path_factory):
    system, weather, result = winter_run
    out = tmp_path_factory.mktemp("report")
    write_report(out, system, result, weather)
    return out


def _text(page: str) -> str:
    """The words a reader sees: no style, no tags, no embedded images."""
    page = re.sub(r"<style>.*?</style>", " ", page, flags=re.S)
    page = re.sub(r"<[^>]+>", " ", page)
    return html.unescape(page)


def _section(page: str, ident: str) -> str:
    match = re.search(rf'<section id="?{ident}"?>(.*?)</section>', page, flags=re.S)
    assert match, ident
    return match.group(1)


def test_the_system_section_says_what_was_studied(written, winter_run):
    system = winter_run[0]
    part = _text(_section((written / "report.html").read_text(), "system"))
    ds = system.module.datasheet
    for words in (f"{ds.v_oc:.2f} V", f"{ds.i_sc:.2f} A", f"{ds.v_mp:.2f} V", f"{ds.i_mp:.2f} A",
                  "Fitted single-diode model", "series resistance R_s", "south roof", "3 in series × 2", "35°",
                  "180° (south)", "close to the roof", "maximum power point tracker", "150 V", "40 A",
                  "lithium iron phosphate (LFP)", "8 in series × 1", "200 Ah"):
        assert words in part, words
    for run in system.cables:
        row = re.search(rf"{re.escape(run.name)}(.*?)(?:\n|$)", part.replace("  ", " "), flags=re.S)
        assert row, run.name
    # Each cable with its size, one-way length and material.
    for size, length in (("4 mm²", "6.0"), ("6 mm²", "22.0"), ("25 mm²", "2.0")):
        assert re.search(rf"{size}\s+{length}\s+copper", part), size
    # The demo's bank (no generator) feeds the weather file's load, and the page says so.
    load = winter_run[2].summary["load_kwh"]
    assert f"The bank feeds a load of {load:,.1f} kWh" in part and "maximum-power tracker at the end" not in part


def test_labels_are_words_not_keys(written):
    # The study's notes may name a key for the reader to type (e.g. pmax_temp_coeff_pct); labels may not.
    page = re.sub(r"<section id=notes>.*?</section>", "", (written / "report.html").read_text(), flags=re.S)
    text = _text(page)
    # Keys of the summary and the system file look like snake_case words.
    keys = [w for w in re.findall(r"\b[a-z]+(?:_[a-z0-9]+)+\b", text)]
    assert keys == []
    for bug in ("peak charge current a", "min soc", "p95", "kwh ", "degC"):
        assert bug not in text, bug


def test_monthly_table_carries_load_and_unmet_load(written, winter_run):
    summary = winter_run[2].summary
    part = _section((written / "report.html").read_text(), "monthly")
    assert "load [kWh]" in part and "unmet load [kWh]" in part
    body = re.search(r"<tbody>(.*?)</tbody>", part, flags=re.S).group(1)
    rows = re.findall(r"<tr[^>]*>(.*?)</tr>", body, flags=re.S)
    assert len(rows) == len(summary["monthly"]) == 2
    for row, month in zip(rows, summary["monthly"]):
        cells = [_text(c).strip() for c in re.findall(r"<td[^>]*>(.*?)</td>", row, flags=re.S)]
        assert f"{month['load_kwh']:,.1f}" in cells and f"{month['unmet_load_kwh']:,.1f}" in cells
        assert f"{month['load_disconnected_hours']:,.0f}" in cells  # the disconnect's hours, month by month
    assert "loads cut off [h]" in part and summary["load_disconnected_hours"] > 0
    # A month that could not supply its load is marked.
    assert summary["monthly"][0]["unmet_load_kwh"] > 0 and 'class="num warn"' in part


def test_no_section_is_empty_and_notes_appear_only_when_there_are_some(winter_run):
    system, weather, result = winter_run
    page = render_page(system, result.summary, (), [], [], -5.0, 20.0)
    for ident, body in re.findall(r'<section id="?(\w+)"?>(.*?)</section>', page, flags=re.S):
        words = _text(re.sub(r"<h2>.*?</h2>", "", body)).split()
        assert len(words) > 3, ident
    assert "Notes" not in page and "<h2></h2>" not in page
    page = render_page(system, result.summary, ("a note on the study",), [], [], -5.0, 20.0)
    assert "a note on the study" in _text(_section(page, "notes"))


def test_failed_checks_and_alerts_stand_out(winter_run):
    system, _, result = winter_run
    failed = Check("max_string_voc", 131.9, 100.0, "V", False, "NEC 690.7(A)", "max", "cold morning")
    passed = Check("min_string_vmp", 82.6, 30.4, "V", True, "common practice", "min", "hot afternoon")
    page = render_page(system, result.summary, (), [failed, passed], [], -5.0, 20.0)
    attention = _section(page, "findings")
    assert re.search(r'<li class="alert"><strong>Check failed.</strong>Highest string open-circuit voltage', attention)
    # The shortfall of the bank is a finding too (the demo's winter runs it down to its load disconnect).
    assert '<li class="warn"><strong>Load not met.' in attention and "Loads disconnected." in attention
    assert result.summary["load_disconnected_hours"] > 0.0
    checks = _section(page, "checks")
    assert re.search(r'<tr class="fail">.*?badge fail">FAIL', checks, flags=re.S)
    assert checks.count('class="fail"') == 1
    # A clean design says so rather than leaving the box empty.
    good = dict(result.summary, unmet_load_kwh=0.0, min_soc=0.4, load_disconnected_hours=0.0)
    assert "No problems found." in _section(render_page(system, good, (), [passed], [], -5.0, 20.0), "findings")


def test_print_stylesheet_is_part_of_the_page(written):
    page = (written / "report.html").read_text()
    assert "@media print" in page and "@page" in page and "break-inside:avoid" in page


def test_the_iv_figure_carries_the_tangent_of_the_operating_point(winter_run):
    system, _, result = winter_run
    curves = iv_curves(system, result.steps)
    assert 2 <= len(curves) <= 4
    for c in curves:
        # The tangent passes through the operating point ...
        assert (c["e_th_v"] - c["v_op"]) / c["r_th_ohm"] == pytest.approx(c["i_op"], abs=1e-6 * max(c["i"]))
        # ... with the slope of the drawn curve there (law: the tangent of a smooth curve; the curve's own
        # finite-difference slope, numpy.gradient, as the outside reference).
        slope = np.interp(c["v_op"], c["v"], np.gradient(c["i"], c["v"]))
        assert -1.0 / c["r_th_ohm"] == pytest.approx(slope, rel=0.05, abs=1e-3)
        # The operating point lies on the curve.
        assert np.interp(c["v_op"], c["v"], c["i"]) == pytest.approx(c["i_op"], abs=2e-3 * max(c["i"]))


CHROMIUM = shutil.which("chromium") or shutil.which("chromium-browser")
FLAGS = ("--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
         "--disable-background-networking", "--disable-component-update", "--disable-sync")


@pytest.mark.skipif(CHROMIUM is None, reason="Chromium is not installed (Debian: apt-get install chromium)")
def test_a_real_browser_draws_the_page_and_prints_it(written, tmp_path):
    from PIL import Image

    png, pdf = tmp_path / "page.png", tmp_path / "page.pdf"
    url = (written / "report.html").resolve().as_uri()
    for extra in ((f"--screenshot={png}", "--window-size=1200,2400"), (f"--print-to-pdf={pdf}", "--no-pdf-header-footer")):
        subprocess.run([CHROMIUM, *FLAGS, f"--user-data-dir={tmp_path / 'profile'}", *extra, url],
                       capture_output=True, timeout=180, check=False)
    with Image.open(png) as im:
        assert im.size == (1200, 2400)
        pixels = np.asarray(im.convert("RGB"), float)
    # A real page: ink covers a fair share of it, in many colours (figures, tiles), not one blank tone.
    background = np.median(pixels.reshape(-1, 3), axis=0)
    ink = np.abs(pixels - background).sum(axis=-1) > 60
    assert 0.03 < ink.mean() < 0.6
    assert len(np.unique(pixels.reshape(-1, 3)[::7], axis=0)) > 200
    # The print stylesheet gives a document of several pages.
    data = pdf.read_bytes()
    assert data[:5] == b"%PDF-" and len(re.findall(rb"/Type\s*/Page\b", data)) >= 3


def test_a_system_without_a_bank_shows_no_bank_lines(winter_run):
    from pvsource.system import Load

    system, _, result = winter_run
    plain = replace(system, bank=None, controller=None, load=Load("mpp"))
    unchecked = Check("max_string_voc", 131.9, None, "V", None, "NEC 690.7(A)", "max", "cold morning")
    page = render_page(plain, result.summary, (), [unchecked], [], -5.0, 20.0)
    text = _text(page)
    assert "delivered to the load" in text and "a maximum-power tracker at the end of the feeder" in text
    for words in ("stored in the bank", "unmet load", "curtailed", "design checks with a limit passed"):
        assert words not in text, words
    assert "Battery bank" not in _section(page, "system")
    # An unchecked limit is said, not counted as a pass.
    assert "Not checked." in _section(page, "findings") and "no limits given" in text


def test_legends_stay_off_the_data(winter_run, tmp_path, monkeypatch):
    # Every legend sits outside the axes (or there is none): none covers a curve or a bar.
    import matplotlib.pyplot as plt

    from pvsource import plots
    from pvsource.sweep import run_sweep

    system, _, result = winter_run
    seen = []

    def keep(fig, path):
        fig.canvas.draw()
        renderer = fig.canvas.get_renderer()
        legends = [*fig.legends, *(ax.get_legend() for ax in fig.axes if ax.get_legend() is not None)]
        covered = [ax.get_title(loc="left") for legend in legends for ax in fig.axes
                   if ax.get_label() != "<colorbar>"
                   and legend.get_window_extent(renderer).overlaps(ax.get_window_extent(renderer))]
        seen.append((path.name, len(legends), covered))
        plt.close(fig)
        return path

    monkeypatch.setattr(plots, "save_atomically", keep)
    steps, summary = result.steps, result.summary
    plots.monthly_energy_figure(summary, tmp_path / "monthly.png")
    plots.wiring_loss_heatmap(steps, tmp_path / "heatmap.png")
    plots.charge_duration_figure(steps, summary["step_h"], tmp_path / "duration.png")
    plots.soc_figure(steps, tmp_path / "soc.png", system.bank.chemistry.min_soc)
    plots.iv_figure(iv_curves(system, steps), tmp_path / "iv.png")
    rows, design = run_sweep(system, "soc", "0", "1", 5, 900.0, 45.0)
    plots.sweep_figure(rows, design, tmp_path / "sweep.png")
    assert len(seen) == 6 and sum(n for _, n, _ in seen) >= 4
    assert [(name, covered) for name, _, covered in seen if covered] == []


def test_an_advisory_check_is_a_warning_not_a_failure(winter_run):
    system, _, result = winter_run
    clipped = Check("controller_output_power", 1821.6, 1136.0, "W", False, "common practice", "max", "clipping",
                    advisory=True)
    page = render_page(system, result.summary, (), [clipped], [], -5.0, 20.0)
    assert "Advisory." in _section(page, "findings") and "Check failed." not in page
    assert 'badge advice">advisory' in _section(page, "checks") and '<tr class="fail">' not in page


@pytest.fixture(scope="module")
def generator_run(winter_run):
    from pvsource.generator import Generator

    system, weather, _ = winter_run
    system = replace(system, generator=Generator(start_soc=0.25, stop_soc=0.8, charger_current_a=35.0,
                                                 min_run_h=1.0, rated_power_w=2000.0, name="backup set"))
    return system, weather, run_season(system, weather)


def test_the_report_shows_the_generators_share(generator_run, tmp_path):
    system, weather, result = generator_run
    s = result.summary
    write_report(tmp_path, system, result, weather)
    page = (tmp_path / "report.html").read_text()
    text = _text(page)
    assert "Backup generator" in _text(_section(page, "system")) and "25 % / 80 %" in text
    assert "Generator ran." in _text(_section(page, "findings"))
    assert "carbon monoxide" in _text(_section(page, "cautions"))
    energy = _text(_section(page, "energy"))
    for label, key in (("carried the load", "generator_load_kwh"), ("stored in the bank", "generator_stored_kwh"),
                       ("lost in the charger", "generator_charger_loss_kwh")):
        assert re.search(rf"{label}\s+{re.escape(f'{s[key]:,.1f}')}", energy), label
    assert f"{s['generator_fuel_l']:,.1f} l" in energy
    # Month by month: the generator's hours and fuel, each month's figures and their sum.
    monthly = _section(page, "monthly")
    assert "generator [h]" in monthly and "generator fuel [l]" in monthly
    for m in s["monthly"]:
        assert f"{m['generator_hours']:,.1f}" in _text(monthly)
    assert f"{s['generator_hours']:,.1f}" in _text(re.search(r"<tfoot>(.*?)</tfoot>", monthly, flags=re.S).group(1))
    # Labels stay words with the generator's lines too.
    body = _text(re.sub(r"<section id=notes>.*?</section>", "", page, flags=re.S))
    assert re.findall(r"\b[a-z]+(?:_[a-z0-9]+)+\b", body) == []


def test_the_monthly_figure_adds_the_generators_panel_with_its_legend_off_the_data(generator_run, tmp_path,
                                                                                   monkeypatch):
    import matplotlib.pyplot as plt

    from pvsource import plots

    seen = []

    def keep(fig, path):
        fig.canvas.draw()
        renderer = fig.canvas.get_renderer()
        legends = [ax.get_legend() for ax in fig.axes if ax.get_legend() is not None]
        covered = [ax.get_title(loc="left") for legend in legends for ax in fig.axes
                   if legend.get_window_extent(renderer).overlaps(ax.get_window_extent(renderer))]
        labels = [t.get_text() for ax in fig.axes for t in (ax.get_legend().get_texts() if ax.get_legend() else [])]
        hours = [t.get_text() for ax in fig.axes for t in ax.texts]
        seen.append((len(fig.axes), covered, labels, hours))
        plt.close(fig)
        return path

    monkeypatch.setattr(plots, "save_atomically", keep)
    summary = generator_run[2].summary
    plots.monthly_energy_figure(summary, tmp_path / "monthly.png")
    axes, covered, labels, hours = seen[0]
    assert axes == 2 and covered == []
    assert "load carried by the generator" in labels and "generator charging the bank" in labels
    assert hours == [f"{m['generator_hours']:.0f} h" for m in summary["monthly"] if m["generator_hours"] > 0]


def test_the_curves_are_drawn_where_the_array_works():
    # A full bank holds the array at open circuit (no current): a curve there shows nothing of the operating
    # point. The picked steps are ones where the array charges, when there are any.
    import pandas as pd

    from pvsource.report import telling_hours

    index = pd.date_range("2025-06-01 08:00", periods=6, freq="h", tz="UTC")
    steps = pd.DataFrame({"groups_p_mp_w": [300.0, 900.0, 1000.0, 950.0, 600.0, 250.0],
                          "group_a_cell_temp_c": [20.0, 40.0, 45.0, 44.0, 35.0, 25.0],
                          "charge_current_a": [10.0, 30.0, 0.0, 0.0, 20.0, 8.0]}, index=index)
    picked = telling_hours(steps)
    assert dict(picked) and all(steps["charge_current_a"].iloc[k] > 0 for k, _ in picked)
    assert dict((why, k) for k, why in picked)["sunniest"] == 1  # 900 W at 30 A, not the idle 1000 W hour
    # With no charging step at all, the curves are still drawn.
    assert telling_hours(steps.assign(charge_current_a=0.0))[0] == (2, "sunniest")
