"""Assemble session and progress reports: one HTML file plus the figures as PNG files.

Audio clips: ``clips="auto"`` (default) embeds them in the HTML as base64
WAV data URIs while their total size stays within :data:`INLINE_LIMIT_BYTES`,
and otherwise copies them beside the report (``OUT/clips/...``) and links
them relatively. Why by size: a clip is about 0.6-1 s of 16-bit audio
(about 20-30 kB at 16 kHz, a third more as base64), so a session of a few
dozen attempts embeds in one or two megabytes -- a single file that opens
anywhere and can be filed in a record system as it is. A progress report
over weeks holds hundreds of clips (tens of megabytes); a page that size
opens slowly and is refused by many mail systems, so its clips are linked
and the folder travels with the HTML. ``"inline"``, ``"link"`` and
``"none"`` force a choice.
"""

from __future__ import annotations

import os
import shutil
from dataclasses import dataclass, field
from pathlib import Path
from typing import Sequence

from livevowel import __version__
from livevowel.errors import UserError
from livevowel.fileio import PRIVATE_FILE_MODE, private_mkdir
from livevowel.report import html as H
from livevowel.report.data import SessionData, is_trial, per_target, result_of, trend
from livevowel.report.figures import MARKERS, figure_png, plane_figure, trend_figure

#: Largest total clip size (bytes, before base64) embedded in the HTML by ``clips="auto"``.
INLINE_LIMIT_BYTES = 4 * 1024 * 1024
CLIP_MODES = ("auto", "inline", "link", "none")
REPORT_NAME = "report.html"


@dataclass
class ReportFiles:
    """What a report build wrote."""

    html: Path
    figures: dict[str, Path]
    clip_mode: str            # "inline", "link" or "none" (as decided)
    clips: int                # clips included
    clips_missing: int        # clips named in the record but not found
    clip_bytes: int
    warnings: list[str] = field(default_factory=list)


def _when(utc: str | None) -> str:
    return utc[:16].replace("T", " ") + " UTC" if utc else "\u2013"


class _Clips:
    """Clip files of the attempts, placed as decided (inline or linked)."""

    def __init__(self, folder: Path | None, sessions: Sequence[SessionData], mode: str, out: Path) -> None:
        if mode not in CLIP_MODES:
            raise UserError(f"clips {mode!r}: choose one of {', '.join(CLIP_MODES)}")
        self.folder, self.out = folder, out
        self.files: dict[tuple[int, int], Path] = {}
        self.missing = 0
        total = 0
        for sd in sessions:
            for a in sd.attempts:
                if not a.get("clip"):
                    continue
                p = (folder / a["clip"]) if folder is not None else None
                if p is not None and p.is_file():
                    self.files[(sd.id, int(a["number"]))] = p
                    total += p.stat().st_size
                else:
                    self.missing += 1
        self.bytes = total
        if mode == "auto":
            mode = "inline" if total <= INLINE_LIMIT_BYTES else "link"
        self.mode = mode if self.files else "none"

    def cell(self, sid: int, number: int, clip: str | None) -> str:
        if not clip:
            return ""
        p = self.files.get((sid, number))
        if p is None:
            return '<span class="flags">clip missing</span>'
        rel = Path(clip)
        name = H.esc(rel.name)
        if self.mode == "none":
            return f'<span class="flags">{name}</span>'
        if self.mode == "inline":
            src = H.data_uri(p.read_bytes(), "audio/wav")
        else:
            dest = self.out / rel
            dest.parent.mkdir(parents=True, exist_ok=True)
            shutil.copyfile(p, dest)
            src = H.esc(rel.as_posix())
        return (f'<audio controls preload="none" src="{src}"></audio>'
                f'<span class="clipname">{H.esc(rel.as_posix())}</span>')


def _result_cell(row) -> tuple[str, str]:
    """(css class, cell html) of an attempt's result; shapes match the plane figure."""
    res = result_of(row) if is_trial(row) else None
    coach = " (coach)" if row.get("override_hit") is not None else ""
    if res is None:
        judged = result_of(row)
        if judged is not None and not row.get("counted", 1):
            return "none", (f'<span class="mk">\u25c7</span>not counted '
                            f'<span class="flags">({"hit" if judged else "miss"})</span>')
        return "none", '<span class="mk">\u25c7</span>not judged'
    if res:
        return "hit", f'<span class="mk">\u25cf</span>hit{coach}'
    return "miss", f'<span class="mk">\u2715</span>miss{coach}'


def _attempts_table(sd: SessionData, clips: _Clips) -> str:
    head = ('<table class="attempts"><thead><tr><th class="n">#</th><th class="n">start s</th><th class="n">block</th>'
            '<th class="n">trial</th><th>prompt</th><th>target</th><th>result</th><th class="n">score</th>'
            '<th class="n">F1 Hz</th><th class="n">F2 Hz</th><th class="n">F0 Hz</th><th>sounded like</th>'
            '<th>notes</th><th>clip</th></tr></thead><tbody>')
    out = [head]
    for a in sd.attempts:
        cls, res = _result_cell(a)
        notes = ", ".join(x for x in (a.get("flags") or "").split(",") if x)
        if a.get("override_note"):
            notes = (notes + "; " if notes else "") + f"coach: {a['override_note']}"
        if not a.get("counted", 1):
            notes = (notes + "; " if notes else "") + "excluded by the coach"
        block = "\u2013" if a.get("block_index") is None else str(a["block_index"] + 1)
        out.append(
            f'<tr class="{cls}" data-number="{a["number"]}"><td class="n">{a["number"]}</td>'
            f'<td class="n">{H.num(a.get("start_s"), ".2f")}</td><td class="n">{H.esc(block)}</td>'
            f'<td class="n">{H.esc(a.get("trial"))}</td><td>{H.esc(a.get("prompt"))}</td>'
            f'<td>{H.esc(a.get("target_id"))}</td><td class="res">{res}</td>'
            f'<td class="n">{H.num(a.get("closeness"))}</td><td class="n">{H.num(a.get("f1_hz"))}</td>'
            f'<td class="n">{H.num(a.get("f2_hz"))}</td><td class="n">{H.num(a.get("f0_hz"))}</td>'
            f'<td>{H.esc(a.get("nearest_id"))}</td><td class="flags">{H.esc(notes) if notes else ""}</td>'
            f'<td>{clips.cell(sd.id, int(a["number"]), a.get("clip"))}</td></tr>')
    out.append("</tbody></table>")
    return "".join(out)


_MODES = {"self_paced": "self-paced drill", "coach": "coach-led drill", "review": "reviewed from a recording",
          "free": "free practice"}


def _mode(mode: str | None) -> str:
    return _MODES.get(mode or "", mode or "\u2013")


def _input(source: str | None, settings: dict | None = None) -> str:
    """The session's input for the page: a file's name only (its folders may name people)."""
    if not source:
        return "\u2013"
    kind, sep, rest = source.partition(":")
    if sep and kind == "file":
        rec = (settings or {}).get("recording")
        extra = ""
        if isinstance(rec, dict) and rec.get("duration_s") and rec.get("rate_hz"):
            extra = f" ({float(rec['duration_s']):.1f} s, {float(rec['rate_hz']):.0f} Hz)"
        return f"recording {os.path.basename(rest)}{extra}"
    return source


def _set_label(sd: SessionData) -> str:
    ts = sd.target_set
    if ts is None:
        return sd.session.get("target_set") or "\u2013"
    return f"{ts.title} ({ts.id})"


def _plane_caption(sd_list: Sequence[SessionData]) -> str:
    notes = [sd.target_set_note for sd in sd_list if sd.target_set_note]
    return ("Each attempt at the median F1 and F2 of its steady part: hit = green " + MARKERS["hit"] +
            ", miss = orange-red " + MARKERS["miss"] + ", not counted (flagged, excluded by the coach, or no prompt) = grey " +
            MARKERS["unjudged"] + ". Regions of the prompted targets are drawn solid at the hit size of their "
            "trials, the other targets of the set dashed; a dotted line joins each miss to the target it aimed at. "
            "F2 grows to the left and F1 downwards, as on a vowel chart." + (" " + " ".join(notes) if notes else ""))


def _header(title: str, sub: str, pairs) -> str:
    return (f"<header><h1>{H.esc(title)}</h1><div class=\"sub\">{H.esc(sub)}</div>"
            f"{H.meta_list(pairs)}</header>")


def _footer() -> str:
    from livevowel.session.store import utc_now

    return (f"<footer><p>{H.esc(H.PRIVACY)}</p><p>Made {H.esc(_when(utc_now()))} with livevowel "
            f"{H.esc(__version__)}. {H.esc('Not a diagnostic or medical device.')}</p></footer>")


def _session_numbers(sessions: Sequence[SessionData]) -> str:
    att = sum(len(s.attempts) for s in sessions)
    trials = sum(s.trials for s in sessions)
    hits = sum(s.hits for s in sessions)
    flagged = sum(s.flagged for s in sessions)
    items = [("attempts", str(att)), ("trials", str(trials)), ("hits", str(hits)),
             ("accuracy", H.pct(hits, trials)), ("flagged attempts", str(flagged))]
    if len(sessions) > 1:
        items.insert(0, ("sessions", str(len(sessions))))
    return H.numbers(items)


def _write_png(out: Path, name: str, png: bytes) -> Path:
    from livevowel.fileio import write_bytes_atomic

    p = out / name
    write_bytes_atomic(p, png, permissions=PRIVATE_FILE_MODE)
    return p


def _prepare_out(out: "str | os.PathLike") -> Path:
    out = Path(out)
    try:
        private_mkdir(out)
    except OSError as exc:
        raise UserError(f"{out}: cannot create the report folder ({exc.strerror}); choose another --out") from None
    return out


def _tables(sd: SessionData) -> str:
    parts = []
    pt = sd.per_target()
    pb = sd.per_block()
    if pt:
        parts.append("<h3>Per target</h3>" + H.tally_table(pt, first="target", css_class="per-target"))
    if pb:
        parts.append("<h3>Per block</h3>" + H.tally_table(pb, first="block", css_class="per-block"))
    if not parts:
        parts.append('<p class="note">No prompted trials in this session (attempts were measured, not judged).</p>')
    parts.append(_adapt_table(sd))
    return "".join(parts)


#: How each lever of an adaptive rule is shown (value format, unit).
_LEVERS = {"hit_size": ("hit size", ".2f", " SD"), "hold": ("hold", ".2f", " s"), "level": ("level", "", "")}


def _adapt_table(sd: SessionData) -> str:
    """The adaptive rule's changes, in order (empty when the drill made none)."""
    rows = []
    for e in sd.events:
        if e.get("kind") != "adapt":
            continue
        d = _detail(e)
        name, fmt, unit = _LEVERS.get(d.get("lever"), (None, "", ""))
        if name is None:
            change = H.esc(d.get("reason") or "no change")
        else:
            change = (f"{H.esc(name)} {H.esc(format(d['from'], fmt) if fmt else d['from'])}{unit} \u2192 "
                      f"{H.esc(format(d['to'], fmt) if fmt else d['to'])}{unit}")
        acc = d.get("accuracy")
        block = "\u2013" if e.get("block_index") is None else str(e["block_index"] + 1)
        rows.append(f'<tr><td class="n">{H.num(e.get("stream_s"), ".2f")}</td><td class="n">{H.esc(block)}</td>'
                    f'<td>{H.esc(d.get("direction"))}</td><td>{change}</td>'
                    f'<td class="n">{"" if acc is None else f"{100 * acc:.0f} %"}</td></tr>')
    if not rows:
        return ""
    return ('<h3>Adaptive changes</h3><table class="adapt"><thead><tr><th class="n">at s</th><th class="n">block</th>'
            '<th>direction</th><th>change</th><th class="n">accuracy that moved it</th></tr></thead><tbody>'
            + "".join(rows) + "</tbody></table>")


def _detail(event: dict) -> dict:
    """An event's detail (its ``detail_json``), ``{}`` when it has none or it is unreadable."""
    import json

    try:
        d = json.loads(event.get("detail_json") or "{}")
    except ValueError:
        return {}
    return d if isinstance(d, dict) else {}


def _events_note(sd: SessionData) -> str:
    msgs = []
    for e in sd.events:
        if e.get("kind") == "warning":
            msgs.append(str(_detail(e).get("message", "")))
    if not sd.session.get("ended_utc"):
        msgs.append("The session has no end time: it was stopped abruptly; everything up to its last recorded "
                    "attempt is kept.")
    return "".join(f'<p class="note">\u26a0 {H.esc(m)}</p>' for m in msgs if m)


def build_session_report(store, session_id: int, out: "str | os.PathLike", *, clips: str = "auto") -> ReportFiles:
    """Write the report of one session into folder ``out``.

    Parameters
    ----------
    store : livevowel.session.store.Store
    session_id : int
    out : path
        Folder for ``report.html`` and ``plane.png`` (made if needed).
    clips : str, keyword-only
        ``"auto"``, ``"inline"``, ``"link"`` or ``"none"`` (module docstring).
    """
    from livevowel.report.data import load_session
    from livevowel.fileio import write_text_atomic

    sd = load_session(store, session_id)
    out = _prepare_out(out)
    s = sd.session
    spk = s.get("speaker_id") or "anonymous"
    drill = s.get("drill") or ("free practice" if s.get("mode") != "review" else "none")
    plane_png = figure_png(plane_figure(sd.attempts, sd.target_set,
                                        title=f"Session {sd.id}: every attempt on the vowel plane"))
    figs = {"plane": _write_png(out, "plane.png", plane_png)}
    cl = _Clips(store.folder, [sd], clips, out)
    pairs = [("speaker (pseudonym)", spk), ("session", sd.id), ("started", _when(s.get("started_utc"))),
             ("ended", _when(s.get("ended_utc")) if s.get("ended_utc") else "not recorded (stopped abruptly)"),
             ("drill", drill), ("target set", _set_label(sd)), ("mode", _mode(s.get("mode"))),
             ("input", _input(s.get("source"), sd.settings)), ("livevowel (session)", s.get("app_version")),
             ("voice group", (sd.speaker or {}).get("voice_group") or "\u2013")]
    if s.get("note"):
        pairs.append(("note", s["note"]))
    body = [
        _header(f"Session report \u2013 speaker {spk}", f"session {sd.id} \u00b7 {_when(s.get('started_utc'))} "
                f"\u00b7 livevowel {s.get('app_version')}", pairs),
        H.caution_box(),
        _session_numbers([sd]), _events_note(sd),
        "<h2>Vowel plane</h2>", H.img(plane_png, f"vowel plane of session {sd.id}", _plane_caption([sd])),
        "<h2>Trials, hits and accuracy</h2>", _tables(sd),
        "<h2>Attempts</h2>",
        '<p class="note">Score: closeness to the target, 0\u2013100 (50 on the region edge). Times are seconds '
        "from the start of the input." + (" Play a clip with its button; in print the clip's file name is shown."
                                         if cl.mode != "none" else "") + "</p>",
        _attempts_table(sd, cl),
        "<h2>Settings</h2>", H.settings_block(sd.settings),
        _footer(),
    ]
    path = out / REPORT_NAME
    write_text_atomic(path, H.page(f"livevowel session {sd.id} \u2013 {spk}", "\n".join(body)),
                      permissions=PRIVATE_FILE_MODE)
    return ReportFiles(path, figs, cl.mode, len(cl.files) if cl.mode != "none" else 0, cl.missing, cl.bytes,
                       [sd.target_set_note] if sd.target_set_note else [])


def build_speaker_report(store, speaker_id: str, out: "str | os.PathLike", *, since: str | None = None,
                         clips: str = "auto") -> ReportFiles:
    """Write a speaker's progress report (sessions since ``since``, ``YYYY-MM-DD``) into folder ``out``.

    Figures: ``trend.png`` (accuracy per target across sessions) and
    ``plane.png`` (every attempt of the period).
    """
    from livevowel.fileio import write_text_atomic
    from livevowel.report.data import load_speaker

    sessions = load_speaker(store, speaker_id, since=since)
    out = _prepare_out(out)
    latest = sessions[-1]
    ts = next((sd.target_set for sd in reversed(sessions) if sd.target_set is not None), None)
    sets = sorted({str(sd.session.get("target_set")) for sd in sessions if sd.session.get("target_set")})
    # with more than one set, a target id of one set is not joined to the same id of another
    series = trend(sessions, by_set=len(sets) > 1)
    set_of = {}
    for sd in sessions:
        if sd.target_set is not None:
            set_of[str(sd.session.get("target_set") or "")] = sd.target_set
    labels = {}
    for tid, name in series:
        tset = set_of.get(name, ts) if name else ts
        t = tset.find(tid) if tset is not None else None
        lab = f"{t.ipa}  {t.lexical_set}" if t is not None and t.ipa else tid
        labels[tid, name] = f"{lab} ({name})" if name else lab
    trend_png = figure_png(trend_figure(series, labels=labels,
                                        title=f"Speaker {speaker_id}: accuracy per target, session by session"))
    # one plane, one set: each attempt is drawn against the regions it was judged by
    key = next((sd.session.get("target_set") for sd in reversed(sessions) if sd.target_set is not None), None)
    drawn = [sd for sd in sessions if sd.session.get("target_set") == key] if key is not None else sessions
    left = [sd for sd in sessions if sd not in drawn]
    all_rows = [a for sd in drawn for a in sd.attempts]
    plane_png = figure_png(plane_figure(all_rows, ts, title=f"Speaker {speaker_id}: every attempt of "
                                        f"{len(drawn)} session(s)" + (f" on {key}" if left else "")))
    plane_note = ""
    if left:
        by_set: dict[str, list[str]] = {}
        for sd in left:
            by_set.setdefault(str(sd.session.get("target_set") or "no set"), []).append(str(sd.id))
        plane_note = (f" Drawn here: the sessions judged against {key} ({', '.join(str(sd.id) for sd in drawn)}). "
                      "Sessions judged against other sets are left out, as their regions differ ("
                      + "; ".join(f"{k}: {', '.join(v)}" for k, v in by_set.items())
                      + "); their session reports show them.")
    figs = {"trend": _write_png(out, "trend.png", trend_png), "plane": _write_png(out, "plane.png", plane_png)}
    cl = _Clips(store.folder, sessions, clips, out)
    first, last = sessions[0].session.get("started_utc"), latest.session.get("started_utc")
    versions = sorted({str(sd.session.get("app_version")) for sd in sessions})
    spk = store.speaker(speaker_id) or {}
    pairs = [("speaker (pseudonym)", speaker_id), ("sessions", len(sessions)),
             ("first", _when(first)), ("last", _when(last)),
             ("since (filter)", since or "all sessions"), ("target sets", ", ".join(sets) or "\u2013"),
             ("voice group", spk.get("voice_group") or "\u2013"), ("livevowel (sessions)", ", ".join(versions))]
    # sessions x targets table
    targets = list(series)
    th = "".join(f'<th class="n">{H.esc(labels[t])}</th>' for t in targets)
    trows = []
    for sd in sessions:
        name = str(sd.session.get("target_set") or "") if len(sets) > 1 else ""
        cells = {(t.key, name): t for t in per_target(sd.attempts)}
        tds = "".join(
            f'<td class="n">{H.pct(cells[t].hits, cells[t].trials)} <span class="flags">'
            f'({cells[t].hits}/{cells[t].trials})</span></td>' if t in cells and cells[t].trials
            else '<td class="n">\u2013</td>' for t in targets)
        trows.append(f'<tr data-session="{sd.id}"><td>#{sd.id}</td><td>{H.esc(_when(sd.session.get("started_utc")))}'
                     f"</td>{tds}</tr>")
    trend_table = (f'<table class="trend"><thead><tr><th>session</th><th>started</th>{th}</tr></thead><tbody>'
                   + "".join(trows) + "</tbody></table>") if targets else ""
    srows = "".join(
        f'<tr data-session="{sd.id}"><td class="n">{sd.id}</td><td>{H.esc(_when(sd.session.get("started_utc")))}</td>'
        f'<td>{H.esc(sd.session.get("drill"))}</td><td>{H.esc(sd.session.get("target_set"))}</td>'
        f'<td>{H.esc(_mode(sd.session.get("mode")))}</td><td class="n">{len(sd.attempts)}</td>'
        f'<td class="n trials">{sd.trials}</td><td class="n hits">{sd.hits}</td>'
        f'<td class="n acc">{H.pct(sd.hits, sd.trials)}</td></tr>' for sd in sessions)
    session_table = ('<table class="sessions"><thead><tr><th class="n">#</th><th>started</th><th>drill</th>'
                     '<th>target set</th><th>mode</th><th class="n">attempts</th><th class="n">trials</th>'
                     '<th class="n">hits</th><th class="n">accuracy</th></tr></thead><tbody>' + srows
                     + "</tbody></table>")
    body = [
        _header(f"Progress report \u2013 speaker {speaker_id}",
                f"{len(sessions)} session(s), {_when(first)} to {_when(last)}", pairs),
        H.caution_box(),
        _session_numbers(sessions),
        "<h2>Accuracy per target across sessions</h2>",
        H.img(trend_png, f"accuracy per target across the sessions of {speaker_id}",
              "Hits / trials per target in each session; each target has its own colour and marker shape. "
              "Sessions are spaced evenly in time order; the table gives the counts."),
        trend_table or '<p class="note">No judged trials in these sessions.</p>',
        "<h2>Sessions</h2>", session_table,
        "<h2>Vowel plane</h2>", H.img(plane_png, f"vowel plane of {speaker_id}", _plane_caption(drawn) + plane_note),
    ]
    for sd in sessions:
        s = sd.session
        body += [f"<h2>Session {sd.id} \u00b7 {H.esc(_when(s.get('started_utc')))} \u00b7 "
                 f"{H.esc(s.get('drill') or s.get('mode'))}</h2>",
                 H.meta_list([("target set", _set_label(sd)), ("input", _input(s.get("source"), sd.settings)),
                              ("mode", _mode(s.get("mode"))), ("livevowel", s.get("app_version"))]
                             + ([("note", s["note"])] if s.get("note") else [])),
                 _session_numbers([sd]), _events_note(sd), _tables(sd), "<h3>Attempts</h3>",
                 _attempts_table(sd, cl)]
    body += ["<h2>Settings of the latest session</h2>", H.settings_block(latest.settings), _footer()]
    path = out / REPORT_NAME
    write_text_atomic(path, H.page(f"livevowel progress \u2013 {speaker_id}", "\n".join(body)),
                      permissions=PRIVATE_FILE_MODE)
    notes = sorted({sd.target_set_note for sd in sessions if sd.target_set_note})
    return ReportFiles(path, figs, cl.mode, len(cl.files) if cl.mode != "none" else 0, cl.missing, cl.bytes, notes)
