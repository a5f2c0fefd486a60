"""Drill files (model and validation) and the trial-by-trial controller.

The advance rule "8 hits in the last 10 trials" and the 80 %/50 % adaptive
thresholds are the structures the issue names (accuracy goals: common
practice; challenge point: McAllister, Hitchcock & Ortiz 2020). The expected
sequences below follow from those rules by hand.
"""

import copy
from pathlib import Path

import pytest
import yaml

from livevowel.errors import UserError
from livevowel.session.drills import (DrillRun, check_targets, iter_sequence, load_drill, parse_drill,
                                      resolve_target_set_ref, shipped_drills)

BASE = {
    "drill": "t",
    "target_set": "gae-men",
    "pause_s": 0.5,
    "blocks": [{
        "id": "b1",
        "items": [{"prompt": "beat", "target": "fleece"}, {"prompt": "bit", "target": "kit"}],
        "repetitions": 5,
    }],
}


def drill(**block):
    d = copy.deepcopy(BASE)
    d["blocks"][0].update(block)
    return parse_drill(d, source="t.yaml")


def play(run, hits, *, t0=0.0):
    """Feed judgements in self-paced mode; returns the prompts seen (block, prompt word)."""
    seen = []
    t = t0
    for h in hits:
        if run.done:
            break
        seen.append((run.prompt.block_index, run.prompt.item.prompt))
        run.attempt(h, now_s=t)
        t += run.pause_s
        run.tick(t)
        t += 0.5
    return seen


# -- validation ------------------------------------------------------------------

@pytest.mark.parametrize("change, message", [
    ({"order": "random"}, r"t.yaml: block 1 \(b1\).order: 'random' is not one of fixed, shuffled, contrast"),
    ({"repetitions": 0}, r"block 1 \(b1\).repetitions: 0 is too small"),
    ({"items": [{"prompt": "beat"}]}, r"block 1 \(b1\) item 1: the key 'target' is missing"),
    ({"items": [{"prompt": "beat", "target": "fleece", "colour": 1}]}, r"item 1: unknown key 'colour'"),
    ({"advance": {"hits": 11, "in_last": 10}}, r"advance: hits \(11\) cannot exceed in_last \(10\)"),
    ({"advance": {"hits": 8}}, r"hits needs in_last"),
    ({"advance": {"trials": 5, "hits": 3, "in_last": 4}}, r"either trials or hits"),
    ({"seed": 3}, r"only a shuffled block uses a seed"),
    ({"order": "contrast", "items": [{"prompt": "a", "target": "fleece"}, {"prompt": "b", "target": "kit"},
                                     {"prompt": "c", "target": "dress"}]}, r"contrast alternates two targets"),
    ({"adapt": {"harder_at": 0.4, "easier_at": 0.5}}, r"easier_at \(0.5\) must be below harder_at"),
    ({"adapt": {"change": "speed"}}, r"adapt.change: 'speed' is not one of hit_size, hold, item"),
    ({"adapt": {"change": "item"}}, r"'item' needs items of at least two levels"),
    ({"hit_size_sd": "big"}, r"hit_size_sd: expected a number"),
    ({"bogus": 1}, r"block 1: unknown key 'bogus'"),
])
def test_bad_blocks_name_file_block_and_key(change, message):
    with pytest.raises(UserError, match=message):
        drill(**change)


def test_bad_top_level():
    with pytest.raises(UserError, match="the key 'blocks' is missing"):
        parse_drill({"drill": "x", "target_set": "s"}, source="f.yaml")
    with pytest.raises(UserError, match="block id 'b1' is used twice"):
        d = copy.deepcopy(BASE)
        d["blocks"].append(copy.deepcopy(d["blocks"][0]))
        parse_drill(d, source="f.yaml")


def test_bad_yaml_and_missing_file(tmp_path):
    p = tmp_path / "d.yaml"
    p.write_text("drill: x\nblocks: [\n")
    with pytest.raises(UserError, match=r"d.yaml: line \d+ is not valid YAML"):
        load_drill(p)
    with pytest.raises(UserError, match="no such drill file"):
        load_drill(tmp_path / "none.yaml")


def test_missing_target_id_is_named():
    from livevowel.targets import load_target_set

    d = drill(items=[{"prompt": "beat", "target": "fleece"}, {"prompt": "bot", "target": "caught"}])
    with pytest.raises(UserError, match=r"block 1 \(b1\) item 2: target 'caught' is not in set 'gae-men'"):
        check_targets(d, load_target_set("gae-men"))


def test_shipped_drills_load_and_name_real_targets():
    from livevowel.targets import load_target_set

    names = shipped_drills()
    assert len(names) >= 3
    for n in names:
        d = load_drill(n)
        check_targets(d, load_target_set(resolve_target_set_ref(d)))


def test_defaults_are_inherited(tmp_path):
    d = copy.deepcopy(BASE)
    d["defaults"] = {"hit_size_sd": 1.2, "hold_s": 0.3}
    p = tmp_path / "x.yaml"
    p.write_text(yaml.safe_dump(d))
    dr = load_drill(p)
    assert dr.blocks[0].hit_size_sd == 1.2 and dr.blocks[0].hold_s == 0.3


# -- orders ----------------------------------------------------------------------

def test_fixed_order_repeats_items():
    seq = [it.prompt for _, it in iter_sequence(drill(repetitions=3))]
    assert seq == ["beat", "bit"] * 3


def test_contrast_alternates_two_targets():
    d = drill(order="contrast", repetitions=2, items=[
        {"prompt": "beat", "target": "fleece"}, {"prompt": "sheep", "target": "fleece"},
        {"prompt": "bit", "target": "kit"}, {"prompt": "ship", "target": "kit"}])
    seq = [it.target for _, it in iter_sequence(d)]
    assert seq == ["fleece", "kit"] * 4
    words = [it.prompt for _, it in iter_sequence(d)]
    assert words[:4] == ["beat", "bit", "sheep", "ship"]


def test_shuffled_order_is_reproducible_from_the_recorded_seed():
    d = drill(order="shuffled", repetitions=10)
    run = DrillRun(d, seed=None)
    seed = run.seeds["b1"]
    a = [it.prompt for _, it in iter_sequence(d, seed=None)]
    # same seed (given in the file) -> same order; each round holds each item once
    d2 = drill(order="shuffled", repetitions=10, seed=seed)
    s1 = [it.prompt for _, it in iter_sequence(d2)]
    s2 = [it.prompt for _, it in iter_sequence(d2)]
    assert s1 == s2 and len(s1) == 20
    for k in range(0, 20, 2):
        assert sorted(s1[k:k + 2]) == ["beat", "bit"]
    assert len(a) == 20
    # a different seed gives (almost surely) a different order over 10 rounds
    s3 = [it.prompt for _, it in iter_sequence(drill(order="shuffled", repetitions=10, seed=seed + 1))]
    assert s3 != s1


# -- advance rules ---------------------------------------------------------------

def test_eight_of_last_ten_advances_at_the_right_trial():
    d = drill(repetitions=15, advance={"hits": 8, "in_last": 10})
    run = DrillRun(d)
    # miss, miss, then 8 hits: the 8 hits in the last 10 arrive at trial 10
    hits = [False, False] + [True] * 8
    play(run, hits)
    assert run.done
    assert run.block_states[0].criterion_met
    ends = [e for e in run.pop_events() if e["kind"] == "block_end"]
    assert ends[0]["detail"]["trials"] == 10 and ends[0]["detail"]["hits"] == 8


def test_hits_rule_counts_only_the_last_ten():
    d = drill(repetitions=10, advance={"hits": 8, "in_last": 10})      # block length 2 x 10 = 20
    run = DrillRun(d)
    # 7 hits early, then misses and alternation: no window of ten ever holds 8 hits
    hits = [True] * 7 + [False] * 3 + [True, False] * 5 + [True] * 5
    best = max(sum(hits[max(0, k - 10):k]) for k in range(1, 21))
    assert best == 7   # (checked by hand: trials 1-10 hold 7, later windows fewer)
    play(run, hits)
    st = run.block_states[0]
    assert len(st.results) == 20 and not st.criterion_met and run.done
    assert [r.hit for r in st.results] == hits[:20]


def test_block_ends_after_n_trials_and_next_block_starts():
    d = copy.deepcopy(BASE)
    d["blocks"][0]["advance"] = {"trials": 3}
    d["blocks"].append({"id": "b2", "items": [{"prompt": "bet", "target": "dress"}], "repetitions": 2})
    run = DrillRun(parse_drill(d, source="t"))
    seen = play(run, [True, False, True, True, True])
    assert seen == [(0, "beat"), (0, "bit"), (0, "beat"), (1, "bet"), (1, "bet")]
    assert run.done


def test_flagged_attempt_counts_for_nothing():
    run = DrillRun(drill(repetitions=1))
    p = run.prompt
    assert run.attempt(None, now_s=0.0) is None
    assert run.prompt == p and run.state == "prompt" and run.block_states[0].results == []


def test_self_paced_pause_and_attempts_during_it():
    run = DrillRun(drill(repetitions=2), pause_s=1.0, start_s=0.0)
    assert run.accepts(0.1)
    run.attempt(True, now_s=0.5)
    assert run.state == "result" and not run.accepts(0.6)
    run.tick(1.4)
    assert run.state == "result"
    run.tick(1.5)
    assert run.state == "prompt" and run.prompt.item.prompt == "bit" and run.prompt.shown_at_s == 1.5
    assert not run.accepts(1.2) and run.accepts(1.6)


def test_input_ending_in_the_last_results_pause_finishes_the_drill():
    run = DrillRun(drill(repetitions=1), pause_s=1.0, start_s=0.0)     # two items, one block
    run.attempt(True, now_s=0.5)
    run.settle(0.8)                     # not the last trial: the drill is cut short, nothing moves
    assert run.state == "result" and not run.done
    run.tick(1.5)
    run.attempt(False, now_s=2.0)
    run.settle(2.3)                     # the input ended during the last result's pause
    assert run.done and [e["kind"] for e in run.pop_events()][-2:] == ["block_end", "drill_end"]


# -- adaptive rule ---------------------------------------------------------------

def test_adapt_harder_at_80_easier_at_50_same_between():
    d = drill(repetitions=20, hit_size_sd=2.0, advance={"trials": 30},
              adapt={"every": 10, "change": "hit_size", "hit_size_factor": 0.8, "hit_size_range": [0.5, 3.0]})
    run = DrillRun(d)
    play(run, [True] * 8 + [False] * 2)          # 80 % -> harder
    assert run.block.hit_size_sd == pytest.approx(1.6)
    play(run, [True] * 5 + [False] * 5)          # 50 % -> easier
    assert run.block.hit_size_sd == pytest.approx(2.0)
    play(run, [True] * 7 + [False] * 3)          # 70 % -> unchanged
    assert run.block.hit_size_sd == pytest.approx(2.0)
    adapts = [e["detail"] for e in run.pop_events() if e["kind"] == "adapt"]
    assert [a["direction"] for a in adapts] == ["harder", "easier", "same"]
    assert adapts[0]["accuracy"] == pytest.approx(0.8)


def test_adapt_levers_in_order_and_limits():
    d = drill(repetitions=30, hit_size_sd=1.0, hold_s=0.2, advance={"trials": 40},
              adapt={"every": 10, "change": ["hit_size", "hold"], "hit_size_factor": 0.8,
                     "hit_size_range": [0.9, 3.0], "hold_step_s": 0.1, "hold_range": [0.0, 0.3]})
    run = DrillRun(d)
    play(run, [True] * 10)                        # hit size 1.0 -> 0.9 (clamped)
    assert run.block.hit_size_sd == pytest.approx(0.9) and run.block.hold_s == pytest.approx(0.2)
    play(run, [True] * 10)                        # hit size at its limit: the hold grows
    assert run.block.hit_size_sd == pytest.approx(0.9) and run.block.hold_s == pytest.approx(0.3)
    play(run, [True] * 10)                        # both at their limits
    last = [e["detail"] for e in run.pop_events() if e["kind"] == "adapt"][-1]
    assert last["lever"] is None and "limit" in last["reason"]
    # the new task shows in the next prompt
    assert run.prompt.hit_size_sd == pytest.approx(0.9) and run.prompt.hold_s == pytest.approx(0.3)


def test_adapt_item_lever_moves_between_levels():
    d = drill(repetitions=10, advance={"trials": 30}, order="fixed",
              items=[{"prompt": "far1", "target": "fleece", "level": 1},
                     {"prompt": "far2", "target": "lot", "level": 1},
                     {"prompt": "near1", "target": "kit", "level": 2},
                     {"prompt": "near2", "target": "dress", "level": 2}],
              adapt={"every": 10, "change": "item"})
    run = DrillRun(d)
    seen = play(run, [True] * 10)
    assert {w for _, w in seen} == {"far1", "far2"}
    seen = play(run, [False] * 10)                # at level 2 now; all misses -> back down
    assert {w for _, w in seen} == {"near1", "near2"}
    seen = play(run, [True] * 2)
    assert {w for _, w in seen} == {"far1", "far2"}


# -- coach-led ------------------------------------------------------------------

def test_coach_mode_waits_for_next_and_can_repeat_skip_override():
    d = copy.deepcopy(BASE)
    d["blocks"][0]["advance"] = {"hits": 2, "in_last": 2}
    d["blocks"].append({"id": "b2", "items": [{"prompt": "bet", "target": "dress"}], "repetitions": 3})
    run = DrillRun(parse_drill(d, source="t"), mode="coach")
    assert run.prompt.item.prompt == "beat"
    run.attempt(False, now_s=1.0)
    run.tick(100.0)                                # no auto-advance in coach mode
    assert run.state == "result" and run.prompt.item.prompt == "beat"
    assert run.accepts(1.5)                        # a further attempt is a further trial of the same prompt
    run.attempt(True, now_s=2.0)
    run.repeat(3.0)
    assert run.prompt.item.prompt == "beat" and run.prompt.trial == 3
    run.attempt(True, now_s=3.5)
    # two hits in the last two: the block is over when the coach moves on
    run.override(0, 1, hit=True)                   # the coach hears trial 1 as a hit
    assert [r.hit for r in run.block.results] == [True, True, True]
    assert run.block.results[0].auto_hit is False
    run.next(4.0)
    assert run.prompt.block_id == "b2"
    run.skip_block(5.0)
    assert run.done
    ends = [e["detail"] for e in run.pop_events() if e["kind"] == "block_end"]
    assert ends[0]["criterion_met"] and ends[1]["skipped"]


def test_target_set_path_relative_to_the_drill_file(tmp_path):
    import shutil

    from livevowel.targets import load_target_set, shipped_sets

    (tmp_path / "sets").mkdir()
    shutil.copy(shipped_sets()["gae-men"], tmp_path / "sets" / "mine.yaml")
    d = copy.deepcopy(BASE)
    d["target_set"] = "sets/mine.yaml"
    d["blocks"][0]["items"][1]["target"] = "KIT"          # a lexical-set keyword works as well as the id
    p = tmp_path / "drill.yaml"
    p.write_text(yaml.safe_dump(d))
    dr = load_drill(p)
    ref = resolve_target_set_ref(dr)
    assert Path(ref) == tmp_path / "sets" / "mine.yaml"
    check_targets(dr, load_target_set(ref))
