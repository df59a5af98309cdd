"""Progress of a stem set's lockstep read: ``check_stem_set``'s ``on_frames`` contract (strictly
increasing, the last call = the longest file's decoded frames, whatever the block size; the
values are the same with and without it) and the set's part of the progress line (fake clock),
including sets that come from the store.

Expected numbers are arithmetic on the test's own inputs (frames / 48,000 Hz, stated beside
each check).
"""

from __future__ import annotations

import io

import pytest
from signals import noise, programme, write

from checker.meters.base import MeasureOptions
from checker.run.progress import Progress
from checker.run.stemsets import longest_declared_s, with_stem_sets
from checker.stems.sets import check_stem_set, stem_set_from_folder

RATE = 48_000


class FakeClock:
    def __init__(self):
        self.t = 0.0

    def __call__(self):
        return self.t


def _set(folder, mix=True):
    """Stems of 1.5 s and 1.0 s (72,000 and 48,000 frames) and a 1.25 s mix (60,000 frames):
    the lockstep read runs as long as the longest, 72,000 frames."""
    folder.mkdir(parents=True, exist_ok=True)
    a = programme(1.5, seed=1)
    b = 0.3 * noise(1.0, channels=2, seed=2)
    write(folder / "a.wav", a, subtype="FLOAT")
    write(folder / "b.wav", b, subtype="FLOAT")
    mix_path = None
    if mix:
        both = a[:60_000].copy()
        both[:48_000] += b
        mix_path = write(folder.parent / f"{folder.name}-mix.wav", both, subtype="FLOAT")
    return sorted(str(p) for p in folder.iterdir()), mix_path and str(mix_path)


@pytest.mark.parametrize("block_frames", [4_800, 7_001, 48_000, 100_000])
def test_set_read_reports_increasing_frames_ending_at_the_longest_file(tmp_path, block_frames):
    paths, mix = _set(tmp_path / "song")
    calls = []
    options = MeasureOptions(block_frames=block_frames)
    with_cb = check_stem_set(paths, mix, options, on_frames=lambda f, r: calls.append((f, r)))
    frames = [f for f, _ in calls]
    assert all(b > a for a, b in zip(frames, frames[1:], strict=False)), frames
    assert {r for _, r in calls} == {RATE}
    # the longest file: stem a, 1.5 s x 48,000 Hz = 72,000 frames
    longest = max(with_cb.values["set_length_frames"] + [with_cb.values["set_mix_length_frames"]])
    assert frames[-1] == longest == 72_000
    assert len(calls) == -(-72_000 // block_frames)  # one call per lockstep step
    # the callback changes nothing: every value, finding and error is the same without it
    without = check_stem_set(paths, mix, options)
    assert with_cb.to_dict() == without.to_dict()


def test_set_read_values_do_not_depend_on_the_callback_or_the_block_size_for_lengths(tmp_path):
    paths, mix = _set(tmp_path / "song")
    small = check_stem_set(paths, mix, MeasureOptions(block_frames=4_800), on_frames=print_none)
    large = check_stem_set(paths, mix, MeasureOptions(block_frames=48_000))
    # frame counts are exact whatever the block size (1.5 s, 1.0 s; mix 1.25 s at 48 kHz)
    for key in ("set_length_frames", "set_mix_length_frames", "set_length_mismatch_frames"):
        assert small.values[key] == large.values[key]
    assert small.values["set_length_frames"] == [72_000, 48_000]


def print_none(frames: int, rate_hz: int) -> None:
    """A callback that does nothing (the library must not depend on what it does)."""


def test_a_set_with_nothing_to_read_reports_zero_once(tmp_path):
    bad = tmp_path / "song" / "broken.wav"
    bad.parent.mkdir()
    bad.write_bytes(b"RIFF\x00\x00\x00\x00WAVE")  # a header with nothing after it
    calls = []
    sm = check_stem_set([str(bad)], None, on_frames=lambda f, r: calls.append((f, r)))
    assert sm.errors  # unreadable: an error of the set, never a crash
    assert calls == [(0, 0)]  # no readable file: no rate either


def test_longest_declared_length_of_a_set(tmp_path):
    paths, mix = _set(tmp_path / "song", mix=False)
    stem_set = stem_set_from_folder(str(tmp_path / "song"))
    assert longest_declared_s(stem_set) == 1.5  # 72,000 / 48,000


def test_line_names_the_set_and_its_seconds_then_counts_sets(tmp_path):
    clock, log = FakeClock(), io.StringIO()
    p = Progress(log, clock=clock, heartbeat_s=None)
    p.start(2)
    p.advance(stored=True)
    p.advance(stored=True)  # both files from the store, at t = 0
    clock.t = 10.0
    on_frames = p.set_started(2, 3, "song-b", 180.0)
    on_frames(0, RATE)
    assert p.line() == (
        "checking: 2/2 files (measured 0, from the store 2), stem set 2/3 'song-b': 0 of 180 s, "
        "elapsed 0:00:10"
    )
    clock.t = 20.0
    on_frames(41 * RATE, RATE)
    # 41 s read in the 10 s since the set started = 4.1 s/s; not the last set: no ETA
    assert p.line() == (
        "checking: 2/2 files (measured 0, from the store 2), stem set 2/3 'song-b': 41 of 180 s"
        " at 4.1 s/s, elapsed 0:00:20"
    )
    p.count_set(stored=False)
    on_frames = p.set_started(3, 3, "song-c", 60.0)
    clock.t = 30.0
    on_frames(20 * RATE, RATE)
    # the last set: 20 s in 10 s = 2.0 s/s, ETA (60 - 20) / 2 = 20 s
    assert p.line() == (
        "checking: 2/2 files (measured 0, from the store 2), stem set 3/3 'song-c': 20 of 60 s"
        " at 2.0 s/s (sets measured 1, from the store 0), elapsed 0:00:30, ETA 0:00:20"
    )
    p.count_set(stored=True)
    p.close()
    assert log.getvalue().splitlines()[-1] == (
        "checked: 2/2 files (measured 0, from the store 2), stem sets 2 (measured 1, from the"
        " store 1), elapsed 0:00:30"
    )


def test_with_stem_sets_tells_progress_each_set_and_its_frames(tmp_path):
    """The batch's set phase: the set's name and declared length reach the line, the read's
    seconds advance it, and a second pass takes the set from the store."""
    from checker.profile.load import load_profile
    from checker.run.store import open_store

    _set(tmp_path / "song")
    profile = load_profile("mastering-stems")
    options = MeasureOptions()
    store = open_store(tmp_path / "out")
    seen = []

    class Watching(Progress):
        def set_started(self, index, count, name, total_s):
            report = super().set_started(index, count, name, total_s)

            def on_frames(frames, rate):
                report(frames, rate)
                seen.append((self._set_s, self.line()))

            return on_frames

    try:
        for run in (1, 2):
            p = Watching(io.StringIO(), heartbeat_s=None, clock=FakeClock())  # no speed shown
            p.start(0)
            rows = with_stem_sets(
                [str(tmp_path / "song")],
                None,
                profile,
                [],
                options,
                "k",
                store,
                progress=p,
                on_set=lambda row, stored, p=p: p.count_set(stored),
            )
            assert [r.kind for r in rows] == ["set"]
            assert p.counts()["sets_measured"] == (1 if run == 1 else 0)
            assert p.counts()["sets_stored"] == (0 if run == 1 else 1)
    finally:
        store.close()
    # read once (the second pass is from the store): 48,000-frame lockstep steps over
    # 72,000 frames = 1.0 s, then 1.5 s, of the 1.5 s the headers declare (shown rounded)
    assert [s for s, _ in seen] == [1.0, 1.5]
    assert [line.split(", elapsed")[0].split("files, ")[1] for _, line in seen] == [
        "stem set 1/1 'song': 1 of 2 s",
        "stem set 1/1 'song': 2 of 2 s",
    ]


def test_measure_line_in_a_log_every_few_seconds_and_no_final_line_for_a_quick_run():
    """``deliverycheck measure``'s use (checker/cli/measure.py): its own words, a line every
    5 s in a log, a final line only when a line was shown before."""
    clock, log = FakeClock(), io.StringIO()
    p = Progress(log, clock=clock, heartbeat_s=None, verbs=("measuring", "measured"), summary=False)
    p.start(1)
    p.audio.plan(0, 1_000)
    p.audio.started(0, 100.0, lambda: 0.0)
    clock.t = 1.0
    p.audio.finished(0, 100.0)
    p.advance()
    p.close()
    assert log.getvalue() == ""  # done within 5 s: nothing in the log

    clock, log = FakeClock(), io.StringIO()
    p = Progress(log, clock=clock, heartbeat_s=None, verbs=("measuring", "measured"), summary=False)
    p.start(1)
    p.audio.plan(0, 1_000)
    decoded = [0.0]
    p.audio.started(0, 100.0, lambda: decoded[0])
    clock.t, decoded[0] = 5.0, 20.0
    p._draw()  # the heartbeat's call
    p.audio.finished(0, 100.0)
    clock.t = 8.0  # less than 5 s after the last line: no line for the file's end
    p.advance()
    p.close()
    # 20 s in 5 s = 4.0 s/s, ETA (100 - 20) / 4 = 20 s; then 100 s in 8 s = 12.5 s/s
    assert log.getvalue().splitlines() == [
        "measuring: 0/1 files, 20 of 100 s of audio at 4.0 s/s, elapsed 0:00:05, ETA 0:00:20",
        "measured: 1/1 files, 100 of 100 s of audio at 12.5 s/s, elapsed 0:00:08",
    ]


class Tty(io.StringIO):
    def isatty(self) -> bool:
        return True


def test_aside_erases_the_line_on_a_terminal_then_draws_it_again():
    """What `deliverycheck measure` prints between redraws does not land after the line."""
    clock, term = FakeClock(), Tty()
    p = Progress(term, clock=clock, heartbeat_s=None, verbs=("measuring", "measured"))
    p.start(1)
    drawn = "measuring: 0/1 files, elapsed 0:00:00"
    assert term.getvalue() == "\r" + drawn
    with p.aside():
        term.write("result\n")
    p.close()
    blank = "\r" + " " * len(drawn) + "\r"
    assert term.getvalue() == "\r" + drawn + blank + "result\n" + "\r" + drawn + blank
