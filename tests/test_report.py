"""Reports built from a scripted session record, checked in a real headless browser.

The record is written with the store API directly (our own scenario: a
speaker working on FLEECE/KIT and DRESS over three weekly sessions, with a
flagged attempt, a coach's override and an excluded attempt). Each
attempt's F1/F2 is placed at the centre of the vowel it "sounded like" in
the shipped ``gae-men`` set, so hits lie inside their target's region.
The numbers in the report's tables are checked against SQL on the same
database; the page is opened in Debian's chromium and its screenshot is
checked for the plane figure's palette colours (Okabe & Ito 2008).
"""

import base64
import io
import json
import os
import re
import shutil
import subprocess
from html.parser import HTMLParser
from pathlib import Path

import numpy as np
import pytest
import soundfile as sf

from livevowel import CAUTION, __version__
from livevowel.cli import main
from livevowel.report import build_session_report, build_speaker_report
from livevowel.session.store import RESULT_SQL, SessionRecorder, Store

RATE = 16000
# (prompted target, sounded like, auto_hit, trial?, flags, override, counted) per attempt
SCRIPT = {
    "2026-01-05T10:00:00.000Z": [
        ("fleece", "kit", 0, True, "", None, 1), ("kit", "kit", 1, True, "", None, 1),
        ("fleece", "fleece", 1, True, "", None, 1), ("kit", "fleece", 0, True, "", None, 1),
        ("dress", "trap", 0, True, "", None, 1), ("dress", "dress", 1, True, "", None, 1)],
    "2026-01-12T10:00:00.000Z": [
        ("fleece", "fleece", 1, True, "", None, 1), ("kit", "kit", 1, True, "", None, 1),
        ("fleece", "fleece", 1, True, "", None, 1), ("kit", None, None, False, "too_short", None, 1),
        ("kit", "fleece", 0, True, "", None, 1), ("dress", "dress", 1, True, "", None, 1),
        ("dress", "trap", 0, True, "", None, 1)],
    "2026-01-19T10:00:00.000Z": [
        ("fleece", "fleece", 1, True, "", None, 1), ("kit", "kit", 1, True, "", None, 1),
        ("fleece", "kit", 0, True, "", 1, 1),          # the coach heard FLEECE: override to hit
        ("kit", "kit", 1, True, "", None, 1), ("dress", "dress", 1, True, "", None, 1),
        ("dress", "trap", 0, True, "", None, 0),        # excluded by the coach (cough)
        ("dress", "dress", 1, True, "", None, 1), ("dress", "lot", 0, True, "", None, 1)],
}
BLOCK = {"fleece": (0, "fleece-kit"), "kit": (0, "fleece-kit"), "dress": (1, "dress")}


def _clip(freq):
    t = np.arange(int(0.4 * RATE)) / RATE
    return 0.3 * np.sin(2 * np.pi * freq * t) * np.hanning(len(t))


@pytest.fixture(scope="module")
def record(tmp_path_factory):
    from livevowel.targets import load_target_set

    ts = load_target_set("gae-men")
    data = tmp_path_factory.mktemp("report") / "data"
    ids = []
    for k, (started, attempts) in enumerate(SCRIPT.items()):
        rec = SessionRecorder(folder=data, clips=True)
        sid = rec.start(speaker_id="S31", voice_group="adult_male", target_set="gae-men", drill="front-pairs",
                        mode="self_paced", source="file:/home/clinic/S31/week.wav", started_utc=started,
                        settings={"analysis": {"voice": "auto", "hop_ms": 10.0}, "attempts": {"min_duration_s": 0.12}})
        trials = {0: 0, 1: 0}
        for n, (target, like, hit, is_trial, flags, override, counted) in enumerate(attempts, start=1):
            bi, bid = BLOCK[target]
            row = {"number": n, "start_s": 1.0 + 1.5 * n, "end_s": 1.35 + 1.5 * n, "duration_s": 0.35,
                   "block_index": bi, "block_id": bid, "prompt": target, "target_id": target,
                   "hit_size_sd": 2.0, "hold_s": 0.15, "flags": flags, "auto_hit": hit, "counted": counted,
                   "level_db": -20.0}
            if like is not None:
                v = ts.get(like)
                row.update({"f1_hz": v.f1_hz + 7 * k, "f2_hz": v.f2_hz - 11 * k, "f0_hz": 118.0,
                            "nearest_id": like, "closeness": 90.0 if hit else 12.0})
            if is_trial:
                trials[bi] += 1
                row["trial"] = trials[bi]
            rec.attempt(row, samples=_clip(200 + 20 * n), rate_hz=RATE)
            if override is not None:
                rec.override(n, hit=bool(override), note="clear FLEECE to my ear")
        rec.event("block_start", block_index=0, stream_s=0.0, detail={"block_id": "fleece-kit"})
        rec.finish()
        rec.close()
        ids.append(sid)
    return {"data": data, "ids": ids}


class _Tables(HTMLParser):
    """Rows of every <table> by class: list of (tr attributes, [(td class, text)])."""

    def __init__(self):
        super().__init__()
        self.tables, self._t, self._row, self._cell = {}, None, None, None
        self.srcs = []

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        if tag == "table":
            self._t = self.tables.setdefault(a.get("class", ""), [])
        elif tag == "tr" and self._t is not None:
            self._row = (a, [])
        elif tag in ("td", "th") and self._row is not None:
            self._cell = [a.get("class", ""), ""]
        if tag in ("img", "audio") and "src" in a:
            self.srcs.append((tag, a["src"]))

    def handle_data(self, data):
        if self._cell is not None:
            self._cell[1] += data

    def handle_endtag(self, tag):
        if tag in ("td", "th") and self._cell is not None:
            self._row[1].append((self._cell[0], self._cell[1].strip()))
            self._cell = None
        elif tag == "tr" and self._row is not None:
            self._t.append(self._row)
            self._row = None
        elif tag == "table":
            self._t = None


def _parse(path):
    p = _Tables()
    p.feed(Path(path).read_text(encoding="utf-8"))
    return p


def _counts(rows, key_attr):
    """{key: (trials, hits, accuracy text)} from a parsed table."""
    out = {}
    for attrs, cells in rows:
        if key_attr not in attrs:
            continue
        by = {c: t for c, t in cells}
        out[attrs[key_attr]] = (int(by["n trials"]), int(by["n hits"]), by["n acc"])
    return out


def _pct(h, t):
    return f"{100.0 * h / t:.0f} %" if t else "\u2013"


def _sql(conn, group, session_id):
    q = (f"SELECT {group}, count(*), sum({RESULT_SQL}) FROM attempts WHERE session_id = ? AND trial IS NOT NULL "
         f"AND counted = 1 AND {RESULT_SQL} IS NOT NULL GROUP BY {group}")
    return {str(k): (n, h, _pct(h, n)) for k, n, h in conn.execute(q, (session_id,))}


@pytest.fixture(scope="module")
def session_report(record, tmp_path_factory):
    out = tmp_path_factory.mktemp("out") / "s3"
    store = Store.open(record["data"])
    res = build_session_report(store, record["ids"][2], out)
    store.close()
    return res


def test_session_tables_equal_sql(record, session_report):
    sid = record["ids"][2]
    conn = Store.open(record["data"]).conn
    p = _parse(session_report.html)
    assert _counts(p.tables["per-target"], "data-key") == _sql(conn, "target_id", sid)
    by_block = {f"{k}": v for k, v in _sql(conn, "(block_index + 1) || ':' || block_id", sid).items()}
    assert _counts(p.tables["per-block"], "data-key") == by_block
    # the override counts, the excluded attempt does not: FLEECE 2 of 2, DRESS 2 hits in 3 trials
    assert _counts(p.tables["per-target"], "data-key")["fleece"][:2] == (2, 2)
    assert _counts(p.tables["per-target"], "data-key")["dress"][:2] == (3, 2)
    attempts = [r for r in p.tables["attempts"] if "data-number" in r[0]]
    assert len(attempts) == len(SCRIPT["2026-01-19T10:00:00.000Z"])
    third = dict(attempts[2][1])
    assert "hit (coach)" in third["res"] and "clear FLEECE to my ear" in third["flags"]


def test_session_report_is_self_contained_and_carries_the_cautions(record, session_report):
    text = session_report.html.read_text(encoding="utf-8")
    assert not re.search(r'(src|href)="(https?:)?//', text)        # nothing fetched from the network
    p = _parse(session_report.html)
    imgs = [s for t, s in p.srcs if t == "img"]
    audios = [s for t, s in p.srcs if t == "audio"]
    assert len(imgs) == 1 and imgs[0].startswith("data:image/png;base64,")
    assert base64.b64decode(imgs[0].split(",", 1)[1]) == session_report.figures["plane"].read_bytes()
    assert session_report.clip_mode == "inline" and len(audios) == 8
    wav, rate = sf.read(io.BytesIO(base64.b64decode(audios[0].split(",", 1)[1])))
    assert rate == RATE and len(wav) == int(0.4 * RATE)
    assert CAUTION in text.replace("&#x27;", "'")
    assert "Local rules on health-data privacy apply" in text
    assert "S31" in text and f"livevowel {__version__}" in text and "gae-men" in text
    assert "/home/clinic" not in text                     # folders of the input are not shown
    assert "@page" in text and "@media print" in text


def test_clips_linked_beside_the_report(record, tmp_path):
    store = Store.open(record["data"])
    res = build_session_report(store, record["ids"][0], tmp_path / "linked", clips="link")
    p = _parse(res.html)
    audios = [s for t, s in p.srcs if t == "audio"]
    assert res.clip_mode == "link" and len(audios) == 6
    for src in audios:
        assert not src.startswith(("data:", "/")) and (tmp_path / "linked" / src).is_file()
    none = build_session_report(store, record["ids"][0], tmp_path / "noclips", clips="none")
    assert none.clip_mode == "none" and not [s for t, s in _parse(none.html).srcs if t == "audio"]


def test_plane_orientation_and_marker_shapes(record):
    from livevowel.report.figures import plane_figure
    from livevowel.targets import load_target_set

    ts = load_target_set("gae-men")
    rows = Store.open(record["data"]).attempts(record["ids"][0])
    fig = plane_figure(rows, ts)
    ax = fig.axes[0]
    fig.canvas.draw()
    fleece, lot = ts.get("fleece"), ts.get("lot")
    (xf, yf), (xl, yl) = ax.transData.transform([(fleece.f2_hz, fleece.f1_hz), (lot.f2_hz, lot.f1_hz)])
    assert xf < xl          # higher F2 (FLEECE, ~2300 Hz) is further left than LOT (~1300 Hz)
    assert yf > yl          # higher F1 (LOT) is lower on the page (display y grows upwards)
    labels = {c.get_label().split(" (")[0]: c for c in ax.collections if c.get_label()}
    assert {"hit", "miss", "not counted"} <= set(labels)
    hit_path = labels["hit"].get_paths()[0].vertices
    miss_path = labels["miss"].get_paths()[0].vertices
    assert hit_path.shape != miss_path.shape or not np.allclose(hit_path, miss_path)
    assert len(labels["hit"].get_offsets()) == 3 and len(labels["miss"].get_offsets()) == 3


def test_speaker_report_trend_equals_sql_and_since_filters(record, tmp_path):
    store = Store.open(record["data"])
    res = build_speaker_report(store, "S31", tmp_path / "all")
    assert set(res.figures) == {"trend", "plane"} and all(p.is_file() for p in res.figures.values())
    p = _parse(res.html)
    sess = _counts(p.tables["sessions"], "data-session")
    for sid in record["ids"]:
        n, h = store.conn.execute(
            f"SELECT count(*), sum({RESULT_SQL}) FROM attempts WHERE session_id = ? AND trial IS NOT NULL "
            f"AND counted = 1 AND {RESULT_SQL} IS NOT NULL", (sid,)).fetchone()
        assert sess[str(sid)] == (n, h, _pct(h, n))
    # the trend table: one row per session, one "acc (hits/trials)" cell per target
    trend = {a["data-session"]: [t for c, t in cells[2:]] for a, cells in p.tables["trend"] if "data-session" in a}
    for sid in record["ids"]:
        expect = _sql(store.conn, "target_id", sid)
        cells = [c for c in trend[str(sid)] if c != "\u2013"]
        assert sorted(cells) == sorted(f"{v[2]} ({v[1]}/{v[0]})" for v in expect.values())
    later = build_speaker_report(store, "S31", tmp_path / "since", since="2026-01-10")
    assert len([r for r in _parse(later.html).tables["sessions"] if "data-session" in r[0]]) == 2


def _chromium():
    return shutil.which("chromium") or shutil.which("chromium-browser")


def _chromium_or_skip() -> str:
    exe = _chromium()
    if exe is None:
        if os.environ.get("CI") == "true":
            pytest.fail("chromium is not installed on CI (.ci/run installs it)")
        pytest.skip("chromium is not installed here (apt-get install chromium)")
    return exe


def _screenshot(html: Path, png: Path, tmp: Path) -> np.ndarray:
    exe = _chromium_or_skip()
    cmd = [exe, "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
           "--disable-background-networking", "--disable-component-update", "--disable-sync",
           f"--user-data-dir={tmp / 'chromium-profile'}", f"--screenshot={png}", "--window-size=1200,2000",
           html.resolve().as_uri()]
    subprocess.run(cmd, check=True, capture_output=True, timeout=120)
    import matplotlib.image

    img = matplotlib.image.imread(str(png))
    return (img[..., :3] * 255).round().astype(int)


def _near(img, hex_colour, tol=12):
    rgb = np.array([int(hex_colour[i:i + 2], 16) for i in (1, 3, 5)])
    return int(np.count_nonzero(np.all(np.abs(img - rgb) <= tol, axis=-1)))


def test_report_opens_in_headless_chromium(record, session_report, tmp_path):
    img = _screenshot(session_report.html, tmp_path / "shot.png", tmp_path)
    assert img.shape[0] >= 1900 and img.shape[1] >= 1100
    assert img.std() > 20                                   # not a blank page
    # the plane's palette hues (Okabe & Ito 2008): blue regions of the prompted targets,
    # bluish-green hits and vermillion misses; the page's own text uses other shades
    assert _near(img, "#0072B2") > 400
    assert _near(img, "#009E73") > 40
    assert _near(img, "#D55E00") > 40


def test_printed_tables_stay_within_the_printed_column(record, session_report, tmp_path):
    # the print rules applied on screen (chromium has no print-media switch on the command line):
    # every table must fit the 182 mm column the body gets on paper
    exe = _chromium_or_skip()
    src = session_report.html.read_text(encoding="utf-8").replace("@media print {", "@media all {")
    probe = ("<script>document.body.setAttribute('data-w', [...document.querySelectorAll('table')]"
             ".map(t => t.className + '=' + t.scrollWidth).join(' ') + ' body=' + document.body.clientWidth);"
             "</script></body>")
    sim = tmp_path / "print-sim.html"
    sim.write_text(src.replace("</body>", probe), encoding="utf-8")
    cmd = [exe, "--headless", "--no-sandbox", "--disable-gpu", "--no-first-run", "--disable-background-networking",
           f"--user-data-dir={tmp_path / 'chromium-profile'}", "--window-size=1100,900", "--dump-dom", sim.as_uri()]
    dom = subprocess.run(cmd, check=True, capture_output=True, text=True, timeout=120).stdout
    widths = dict(item.split("=") for item in re.search(r'data-w="([^"]*)"', dom).group(1).split())
    body = int(widths.pop("body"))
    assert 600 < body < 720                                    # 182 mm at 96 px per inch: 688 px
    assert widths and all(int(w) <= body for w in widths.values()), (widths, body)


def test_cli_report_and_its_errors(record, tmp_path, capsys):
    data = str(record["data"])
    assert main(["report", "--session", str(record["ids"][1]), "--data", data, "--out", str(tmp_path / "r")]) == 0
    out = capsys.readouterr().out
    assert "report.html" in out and "7 clips embedded" in out
    assert (tmp_path / "r" / "plane.png").is_file()
    assert main(["report", "--speaker", "S31", "--data", data, "--out", str(tmp_path / "sp"),
                 "--since", "2026-01-12"]) == 0
    assert (tmp_path / "sp" / "trend.png").is_file()
    assert main(["report", "--session", "99", "--data", data, "--out", str(tmp_path / "x")]) == 2
    assert "no session 99" in capsys.readouterr().err
    assert main(["report", "--speaker", "S31", "--since", "last week", "--data", data]) == 2
    assert "YYYY-MM-DD" in capsys.readouterr().err
    assert main(["report", "--speaker", "NOBODY", "--data", data]) == 2
    assert main(["report", "--speaker", "S31", "--since", "2027-01-01", "--data", data]) == 2
    assert "no sessions since" in capsys.readouterr().err


def test_export_json_history_equals_sql(record, tmp_path, capsys):
    out = tmp_path / "h.json"
    assert main(["export", "--speaker", "S31", "--format", "json", "--out", str(out),
                 "--data", str(record["data"])]) == 0
    doc = json.loads(out.read_text())
    assert doc["format"] == "livevowel-history" and doc["speaker"]["id"] == "S31"
    assert doc["caution"] == CAUTION and [s["id"] for s in doc["sessions"]] == record["ids"]
    conn = Store.open(record["data"]).conn
    for s in doc["sessions"]:
        n, h = conn.execute(f"SELECT count(*), sum({RESULT_SQL}) FROM attempts WHERE session_id = ? AND trial IS "
                            f"NOT NULL AND counted = 1 AND {RESULT_SQL} IS NOT NULL", (s["id"],)).fetchone()
        assert (s["summary"]["trials"], s["summary"]["hits"]) == (n, h)
        assert {t["key"]: (t["trials"], t["hits"]) for t in s["summary"]["per_target"]} == \
            {k: v[:2] for k, v in _sql(conn, "target_id", s["id"]).items()}
        assert len(s["attempts"]) == conn.execute("SELECT count(*) FROM attempts WHERE session_id = ?",
                                                  (s["id"],)).fetchone()[0]
    csv_out = tmp_path / "h.csv"
    assert main(["export", "--speaker", "S31", "--out", str(csv_out), "--data", str(record["data"])]) == 0
    assert len(csv_out.read_text().splitlines()) == 1 + sum(len(v) for v in SCRIPT.values())
    assert main(["export", "1", "--speaker", "S31", "--out", "-", "--data", str(record["data"])]) == 2
    assert main(["export", "1", "--csv", str(tmp_path / "a.csv"), "--format", "json",
                 "--data", str(record["data"])]) == 2


def test_mapped_set_is_rebuilt_from_the_stored_profile():
    from livevowel.report.data import resolve_target_set
    from livevowel.targets import load_target_set

    base = load_target_set("gae-men")
    prof = json.dumps({"transform": {"factors": {"f1": 1.1, "f2": 1.05, "f3": 1.0}}})
    ts, note = resolve_target_set({"target_set": "gae-men@S40"}, {"profile_json": prof})
    assert note == "" and ts.id == "gae-men@S40"
    assert ts.get("fleece").f1_hz == pytest.approx(1.1 * base.get("fleece").f1_hz)
    assert ts.get("fleece").f2_hz == pytest.approx(1.05 * base.get("fleece").f2_hz)
    ts, note = resolve_target_set({"target_set": "gae-men@S40"}, {"profile_json": None})
    assert ts.id == "gae-men" and "unmapped" in note
    ts, note = resolve_target_set({"target_set": "/nowhere/set.yaml"}, None)
    assert ts is None and "not drawn" in note


def test_adaptive_changes_are_listed_in_order():
    import json
    from types import SimpleNamespace

    from livevowel.report.build import _adapt_table

    ev = [{"kind": "block_start", "stream_s": 0.0, "block_index": 0, "detail_json": "{}"},
          {"kind": "adapt", "stream_s": 10.0, "block_index": 0, "detail_json": json.dumps(
              {"direction": "harder", "lever": "hit_size", "from": 1.5, "to": 1.05, "accuracy": 0.8})},
          {"kind": "adapt", "stream_s": 21.5, "block_index": 0, "detail_json": json.dumps(
              {"direction": "easier", "lever": "hold", "from": 0.4, "to": 0.3, "accuracy": 0.5})},
          {"kind": "adapt", "stream_s": 30.0, "block_index": 1, "detail_json": json.dumps(
              {"direction": "harder", "lever": None, "accuracy": 1.0, "reason": "every lever at its limit"})}]
    html = _adapt_table(SimpleNamespace(events=ev))
    rows = re.findall(r"<tr><td.*?</tr>", html)
    text = [re.sub(r"<[^>]+>", "|", r) for r in rows]
    assert len(rows) == 3
    assert "hit size 1.50 SD \u2192 1.05 SD" in text[0] and "80 %" in text[0] and "10.00" in text[0]
    assert "hold 0.40 s \u2192 0.30 s" in text[1] and "easier" in text[1]
    assert "every lever at its limit" in text[2] and "|2|" in text[2]
    assert _adapt_table(SimpleNamespace(events=ev[:1])) == ""        # no changes: no section


def _with_a_later_session_on_the_womens_set(record, tmp_path):
    """A copy of the record with one more session of S31, judged against gae-women: (folder, its id)."""
    data = tmp_path / "data"
    shutil.copytree(record["data"], data)
    rec = SessionRecorder(folder=data, clips=False)          # a later session on the women's set
    sid = rec.start(speaker_id="S31", voice_group="adult_male", target_set="gae-women", drill="front-pairs",
                    mode="self_paced", source="file:/home/clinic/S31/late.wav", started_utc="2026-02-01T10:00:00Z")
    rec.attempt({"number": 1, "start_s": 1.0, "end_s": 1.4, "duration_s": 0.4, "block_index": 0, "block_id": "b",
                 "trial": 1, "prompt": "fleece", "target_id": "fleece", "hit_size_sd": 2.0, "hold_s": 0.15,
                 "auto_hit": 0, "counted": 1, "f1_hz": 400.0, "f2_hz": 2500.0, "level_db": -20.0})
    rec.finish()
    rec.close()
    return data, sid


def test_speaker_plane_draws_each_attempt_only_against_its_own_set(record, tmp_path, monkeypatch):
    from livevowel.report import build as build_mod

    data, sid = _with_a_later_session_on_the_womens_set(record, tmp_path)
    drawn = []
    real = build_mod.plane_figure
    monkeypatch.setattr(build_mod, "plane_figure", lambda rows, ts, **kw: drawn.append((len(rows), ts.id)) or
                        real(rows, ts, **kw))
    res = build_speaker_report(Store.open(data), "S31", tmp_path / "rep")
    assert drawn == [(1, "gae-women")]                       # the men's-set attempts are not drawn on it
    text = res.html.read_text(encoding="utf-8")
    ids = ", ".join(str(i) for i in record["ids"])
    assert f"judged against gae-women ({sid})" in text and f"gae-men: {ids}" in text


def test_speaker_trend_keeps_one_target_of_two_sets_apart(record, tmp_path, monkeypatch):
    # FLEECE judged against the men's set (the record's sessions) and later against the women's set:
    # two lines and two table columns, each with only its own sessions, not one line across both
    from livevowel.report import build as build_mod

    data, sid = _with_a_later_session_on_the_womens_set(record, tmp_path)
    seen = {}
    real = build_mod.trend_figure
    monkeypatch.setattr(build_mod, "trend_figure", lambda series, **kw: seen.update(series=series, **kw) or
                        real(series, **kw))
    store = Store.open(data)
    res = build_speaker_report(store, "S31", tmp_path / "rep")
    series, labels = seen["series"], seen["labels"]
    men = [p.session_id for p in series["fleece", "gae-men"]]
    assert [p.session_id for p in series["fleece", "gae-women"]] == [sid]
    assert sid not in men and men == [s for s in record["ids"] if _sql(store.conn, "target_id", s).get("fleece")]
    assert labels["fleece", "gae-women"].endswith("(gae-women)") and "FLEECE" in labels["fleece", "gae-men"]
    p = _parse(res.html)
    head = [t for c, t in p.tables["trend"][0][1]]
    assert sum("FLEECE" in h for h in head) == 2
    late = next(cells for a, cells in p.tables["trend"] if a.get("data-session") == str(sid))
    col = head.index(labels["fleece", "gae-women"])
    n, h, acc = _sql(store.conn, "target_id", sid)["fleece"]
    assert late[col][1] == f"{acc} ({h}/{n})"
    assert all(t == "\u2013" for i, (c, t) in enumerate(late) if i >= 2 and i != col)


def test_reports_are_private_to_their_owner(record, tmp_path):
    import stat

    res = build_session_report(Store.open(record["data"]), record["ids"][0], tmp_path / "new" / "rep")
    assert stat.S_IMODE(res.html.parent.stat().st_mode) == 0o700
    assert stat.S_IMODE((tmp_path / "new").stat().st_mode) == 0o700
    files = [p for p in res.html.parent.iterdir() if p.is_file()]
    assert files and all(stat.S_IMODE(p.stat().st_mode) == 0o600 for p in files), files
