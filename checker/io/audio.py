"""Open an audio file with libsndfile (soundfile) and yield blocks.

The read loop is our own: ``read(out=buffer)`` into a reused buffer until a
short read, so the header's frame count is never trusted (a truncated WAV
opens without error, a FLAC without a length reports 2**63 - 1 frames, MP3
frame counts can be far off). ``frames_declared`` keeps what the header said;
``frames`` (set by the caller after the loop) is what was actually decoded.

Integer PCM is read as int32 so the sample-domain meters see the exact
integer codes; the float view handed to every meter is ``int32 / 2**31``.
Float and lossy files are read as float64.

The loop calls libsndfile's ``sf_readf_*`` through soundfile's cffi handles
instead of ``SoundFile.read``: that wrapper clamps every read to the header's
frame count and calls ``sf_seek`` around each read, which fails on a FLAC
without a length ("Internal psf_fseek() failed") and would stop an MP3 at its
estimated length. A decoding error part-way raises AudioReadError naming the
time of the first frame that could not be decoded; blocks already yielded
stay valid, but measure() reports the file as an error (no partial results).
"""

from __future__ import annotations

import itertools
import math
import os
import queue
import threading
from collections.abc import Callable, Iterator
from dataclasses import dataclass, field
from typing import BinaryIO

import numpy as np
import soundfile as sf

from checker import upstream
from checker.dsp import native
from checker.model.errors import AudioReadError, UnsupportedAudioError
from checker.model.names import for_libsndfile

MIN_SAMPLE_RATE_HZ = 8_000
MAX_SAMPLE_RATE_HZ = 768_000
MAX_CHANNELS = 64
DEFAULT_BLOCK_FRAMES = 48_000  # fixed-size reads where callers need the same size for every file
#: Automatic block size (block_frames=None): about this many samples per block, i.e. 8 s of
#: stereo at 48 kHz. Every meter has a fixed cost per block (Python, numpy calls), so fewer,
#: larger blocks measure faster: on an hour of stereo, 384,000-frame blocks took about 25 %
#: less time than 48,000-frame ones (make bench). Memory stays bounded: the samples per
#: block, not the frames, are fixed.
BLOCK_SAMPLES = 768_000
MIN_BLOCK_FRAMES = 4_096
MAX_BLOCK_FRAMES = 384_000

#: libsndfile subtypes whose samples are integer codes.
INTEGER_SUBTYPES = {
    "PCM_S8": 8,
    "PCM_U8": 8,
    "PCM_16": 16,
    "PCM_24": 24,
    "PCM_32": 32,
}
FLOAT_SUBTYPES = {"FLOAT": 32, "DOUBLE": 64}

#: Frame counts at or above this are "unknown" (libsndfile's FLAC without a length).
UNKNOWN_FRAMES = 2**62

INT32_SCALE = 1.0 / 2**31

#: Float samples larger than this in magnitude (2**100, about +602 dBFS) are not audio but
#: damage: squares and sums of them overflow float64 and the true-peak filter's float32 path.
#: They are counted and treated as 0, like NaN and Inf (docs/standards.md#sample-domain).
MAX_SAMPLE_MAGNITUDE = 2.0**100


@dataclass(frozen=True)
class StreamInfo:
    path: str
    container: str  # libsndfile format name, e.g. "WAV", "WAVEX", "FLAC", "MP3"
    subtype: str  # e.g. "PCM_24", "FLOAT", "VORBIS"
    sample_rate_hz: int
    channels: int
    frames_declared: int | None  # None when the header gives no usable length
    extra_info: str = ""

    @property
    def is_integer_pcm(self) -> bool:
        return self.subtype in INTEGER_SUBTYPES

    @property
    def is_float(self) -> bool:
        return self.subtype in FLOAT_SUBTYPES

    @property
    def format_bits(self) -> int | None:
        """Nominal bits per sample of the stored format (None for lossy codecs)."""
        return INTEGER_SUBTYPES.get(self.subtype) or FLOAT_SUBTYPES.get(self.subtype)


@dataclass
class Block:
    """One block of audio as every meter sees it.

    ``x``: float64 array (frames, channels), full scale = 1.0.
    ``raw``: the int32 codes for integer PCM (left-justified: a PCM_16 sample
    is ``code << 16``), else None.
    ``start``: index of the block's first frame in the file.
    """

    x: np.ndarray
    raw: np.ndarray | None
    start: int
    #: Results computed once per block and shared by meters (checker.meters.blockstats).
    memo: dict = field(default_factory=dict, repr=False, compare=False)

    @property
    def frames(self) -> int:
        return self.x.shape[0]

    @property
    def xt(self) -> np.ndarray:
        """``x`` channel-major, C-contiguous (channels, frames). The reader stores its
        blocks that way (``x`` is then a transposed view), so this costs nothing for
        them; for other blocks it is a copy, made on every call."""
        t = self.x.T
        return t if t.flags.c_contiguous else np.ascontiguousarray(t)


def out_of_range(block: Block) -> bool:
    """True when a float block holds NaN, Inf or a sample beyond MAX_SAMPLE_MAGNITUDE
    (integer PCM never does). Kept in ``block.memo``: measure() and the meters' prepare
    steps both ask."""
    if block.raw is not None or block.frames == 0:
        return False
    found = block.memo.get("out_of_range")
    if found is None:
        x = block.x
        # NaN makes max() NaN, and a comparison with NaN is False: caught without a mask.
        found = not (x.max() <= MAX_SAMPLE_MAGNITUDE and x.min() >= -MAX_SAMPLE_MAGNITUDE)
        block.memo["out_of_range"] = found
    return found


def open_info(path: str) -> StreamInfo:
    """Read the header only. Raises AudioReadError with a one-line message."""
    check_file(path)
    try:
        info = sf.info(for_libsndfile(path))
    except Exception as exc:  # soundfile raises several types (LibsndfileError, RuntimeError)
        raise AudioReadError(f"{path}: cannot open as audio ({_clean(exc)})") from None
    return _check_info(path, info)


def check_file(path: str) -> None:
    """Fail early, with a plain reason, on what libsndfile reports vaguely ("System error.",
    "Format not recognised."): a directory, a dangling link, no permission, an empty file."""
    if os.path.isdir(path):
        raise AudioReadError(f"{path}: is a directory (expected an audio file)")
    if os.path.islink(path) and not os.path.exists(path):
        raise AudioReadError(f"{path}: dangling symbolic link (its target does not exist)")
    try:
        with open(path, "rb") as fh:
            size = os.fstat(fh.fileno()).st_size
    except OSError as exc:
        raise AudioReadError(
            f"{path}: cannot open ({exc.strerror or type(exc).__name__})"
        ) from None
    if size == 0:
        raise AudioReadError(f"{path}: size = 0 bytes (expected an audio file)")


def _clean(exc: BaseException) -> str:
    text = str(exc).strip().replace("\n", " ")
    # soundfile prefixes messages with the path; keep just the reason.
    if "Error opening" in text and ":" in text:
        text = text.rsplit(":", 1)[-1].strip()
    return text or type(exc).__name__


def _check_info(path: str, info) -> StreamInfo:
    rate = int(info.samplerate)
    channels = int(info.channels)
    if channels < 1 or channels > MAX_CHANNELS:
        raise UnsupportedAudioError(f"{path}: channels = {channels} (expected 1 to {MAX_CHANNELS})")
    if rate < MIN_SAMPLE_RATE_HZ or rate > MAX_SAMPLE_RATE_HZ:
        raise UnsupportedAudioError(
            f"{path}: sample_rate_hz = {rate} "
            f"(expected {MIN_SAMPLE_RATE_HZ} to {MAX_SAMPLE_RATE_HZ} Hz)"
        )
    frames = int(info.frames)
    declared = None if frames < 0 or frames >= UNKNOWN_FRAMES else frames
    return StreamInfo(
        path=path,
        container=str(info.format),
        subtype=str(info.subtype),
        sample_rate_hz=rate,
        channels=channels,
        frames_declared=declared,
        extra_info=str(getattr(info, "extra_info", "") or ""),
    )


def auto_block_frames(info: StreamInfo) -> int:
    """Frames per block when the caller does not fix them: BLOCK_SAMPLES over the channels,
    within MIN_BLOCK_FRAMES..MAX_BLOCK_FRAMES, and no more than the file declares."""
    frames = min(MAX_BLOCK_FRAMES, max(MIN_BLOCK_FRAMES, BLOCK_SAMPLES // info.channels))
    if info.frames_declared is not None:
        frames = min(frames, max(MIN_BLOCK_FRAMES, info.frames_declared + 1))
    return frames


def read_blocks(
    path: str,
    block_frames: int | None = DEFAULT_BLOCK_FRAMES,
    *,
    read_ahead: bool = False,
    prepare: list[Callable[[Block], None]] | None = None,
    source: BinaryIO | None = None,
    walk: list[Callable[..., None]] | None = None,
) -> tuple[StreamInfo, Iterator[Block]]:
    """Open ``path`` and return its StreamInfo and an iterator of Blocks.

    ``block_frames``: frames per block (the last one may be shorter); None picks
    :func:`auto_block_frames` for the file.

    The iterator raises AudioReadError if decoding fails part-way; blocks
    already yielded stay valid. ``read_ahead``: decode the next block in a
    second thread while the caller works on this one (libsndfile and numpy's
    conversions run without the GIL); for a lone measurement, where a core
    would otherwise sit idle. The blocks and their order are the same.

    ``prepare``: functions called with every block, in order, right after it is
    decoded (in the read-ahead thread when there is one) and before the caller
    sees it; the list may be filled after this call, before iterating.

    ``source``: a file-like view of ``path`` to decode instead of the file itself (a FLAC
    whose STREAMINFO understates its length, read with the total marked unknown:
    checker.io.streamlength.FlacUnknownLength); it is closed with the iterator.

    ``walk``: at most one function ``walk(codes, raw_t, x_t, block)`` that replaces the
    compiled deinterleaving of integer PCM: it must fill ``raw_t`` and ``x_t`` (channels,
    frames) from ``codes`` (frames, channels) exactly as ``native.deinterleave_i32`` does,
    and may leave what it computed on the way in ``block.memo`` (the meters' fused walk,
    checker/meters/blockwalk.py). Like ``prepare``, the list may be filled after this call.
    """
    if block_frames is not None and block_frames < 1:
        raise ValueError(f"block_frames = {block_frames} (expected >= 1)")
    check_file(path)
    try:
        handle = sf.SoundFile(for_libsndfile(path) if source is None else source)
    except Exception as exc:
        reason = _clean(exc)
        if "does not exist" in reason:  # libsndfile's words for a codec stream it cannot start
            reason = "the audio stream cannot be decoded"
        raise AudioReadError(f"{path}: cannot open as audio ({reason})") from None
    try:
        info = _check_info(path, handle)
    except Exception:
        handle.close()
        raise
    if block_frames is None:
        block_frames = auto_block_frames(info)
    hooks = prepare if prepare is not None else []
    walks = walk if walk is not None else []
    # A file that declares at most one block has nothing to read ahead: a thread per file
    # would only add its start and hand-overs (about 1 ms per short file measured here).
    # Should the declaration understate, the blocks are the same, only read in turn.
    one_block = info.frames_declared is not None and info.frames_declared <= block_frames
    if read_ahead and not one_block:
        return info, _iterate_ahead(handle, info, block_frames, hooks, walks)
    return info, _iterate(handle, info, block_frames, hooks, walks)


class _Decoder:
    """Decodes block after block into one of ``slots`` sets of buffers.

    Blocks are stored channel-major: ``x`` (and ``raw``) are transposed views of
    C-contiguous (channels, frames) buffers reused from block to block, so every
    per-channel reduction in the meters runs over contiguous memory without a copy.
    """

    def __init__(
        self, handle: sf.SoundFile, info: StreamInfo, block_frames: int, slots: int, walks: list
    ):
        self.handle = handle
        self.info = info
        self.block_frames = block_frames
        self.integer = info.is_integer_pcm
        dtype = "int32" if self.integer else "float64"
        channels = info.channels
        self.buf = np.empty((block_frames, channels), dtype=dtype)  # interleaved, as read
        self.read_into_buf, self.reader_path = upstream.frame_reader(handle, self.buf)
        self.raw_t = [
            np.empty((channels, block_frames), dtype=np.int32) if self.integer else None
            for _ in range(slots)
        ]
        self.x_t = [np.empty((channels, block_frames), dtype=np.float64) for _ in range(slots)]
        self.start = 0
        self.done = False
        self.native = native.enabled()
        self.walks = walks  # filled by the caller before the first block (see read_blocks)

    def next(self, slot: int) -> Block | None:
        """The next block, in buffer set ``slot``; None at the end."""
        if self.done:
            return None
        info, size = self.info, self.block_frames
        try:
            n = self.read_into_buf()
        except upstream.UpstreamReadError as exc:
            raise AudioReadError(
                f"{info.path}: decoding failed at {(self.start + exc.frames) / info.sample_rate_hz:.2f} s ({exc})"
            ) from exc
        if n <= 0:
            self.done = True
            return None
        channels = info.channels
        full = n == size  # a short (last) block gets its own contiguous arrays
        xt = self.x_t[slot] if full else np.empty((channels, n))
        if self.integer:
            rt = self.raw_t[slot] if full else np.empty((channels, n), dtype=np.int32)
            block = Block(x=xt.T, raw=rt.T, start=self.start)
            if self.native and self.walks:
                self.walks[0](self.buf[:n], rt, xt, block)
            elif self.native:
                native.deinterleave_i32(self.buf[:n], rt, xt, INT32_SCALE)
            else:
                np.copyto(rt, self.buf[:n].T)
                np.multiply(rt, INT32_SCALE, out=xt)
        else:
            if self.native:
                native.deinterleave_f64(self.buf[:n], xt)
            else:
                np.copyto(xt, self.buf[:n].T)
            block = Block(x=xt.T, raw=None, start=self.start)
        self.start += n
        self.done = n < size
        return block


def _iterate(
    handle: sf.SoundFile, info: StreamInfo, block_frames: int, hooks: list, walks: list
) -> Iterator[Block]:
    decoder = _Decoder(handle, info, block_frames, 1, walks)
    try:
        with handle:
            while (block := decoder.next(0)) is not None:
                for hook in hooks:
                    hook(block)
                yield block
    finally:
        handle.close()


def _iterate_ahead(
    handle: sf.SoundFile, info: StreamInfo, block_frames: int, hooks: list, walks: list
) -> Iterator[Block]:
    """Two buffer sets: a thread decodes block k + 1 into one (and runs the prepare
    hooks on it) while the caller holds block k in the other; it refills a set only
    once the caller has asked for the block after the one held there."""
    decoder = _Decoder(handle, info, block_frames, 2, walks)
    ready: queue.Queue = queue.Queue()
    free = threading.Semaphore(0)  # released each time the caller moves past a block
    stop = threading.Event()

    def produce() -> None:
        try:
            for i in itertools.count():
                if i >= 2:
                    free.acquire()  # the set of block i - 2 is free again
                if stop.is_set():
                    return
                block = decoder.next(i % 2)
                if block is not None:
                    for hook in hooks:
                        hook(block)
                ready.put((block, None))
                if block is None:
                    return
        except BaseException as exc:  # handed to the caller, raised there
            ready.put((None, exc))

    thread = threading.Thread(target=produce, name="deliverycheck-read-ahead", daemon=True)
    thread.start()
    try:
        while True:
            block, error = ready.get()
            if error is not None:
                raise error
            if block is None:
                return
            yield block
            free.release()
    finally:
        stop.set()
        free.release()
        thread.join()
        handle.close()


def duration_s(frames: int, sample_rate_hz: int) -> float:
    return frames / sample_rate_hz if sample_rate_hz > 0 else math.nan
