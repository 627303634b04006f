"""The relay-box frame codec: checksum against its published check value, round trips, damage."""

from __future__ import annotations

import re
from pathlib import Path

import pytest
from hypothesis import given
from hypothesis import strategies as st

from drivers.relay_frames import (
    MAX_COMMAND_LINE,
    BoxInfo,
    BoxState,
    Command,
    ErrorCode,
    FrameError,
    Reply,
    Verb,
    WatchdogMode,
    crc8,
    decode_command,
    decode_reply,
    encode_command,
    encode_reply,
    format_counts,
    format_info,
    format_relays,
    format_state,
    next_seq,
    parse_counts,
    parse_info,
    parse_relays,
    parse_state,
    parse_watchdog_ms,
)

# Argument text: printable ASCII without space and '*'.
ARG_CHARS = "".join(chr(c) for c in range(0x21, 0x7F) if chr(c) != "*")
seqs = st.integers(min_value=0, max_value=0xFFFF)
args = st.text(alphabet=ARG_CHARS, max_size=40)
texts = st.text(alphabet="".join(c for c in ARG_CHARS + " "), max_size=60)
verbs = st.sampled_from([v.value for v in Verb])


# ---- checksum ---------------------------------------------------------------------------------


def test_crc8_matches_the_catalogue_check_value() -> None:
    # CRC-8/SMBUS in the catalogue of parametrised CRC algorithms (CRC RevEng):
    # width=8 poly=0x07 init=0x00 refin=false refout=false xorout=0x00 check=0xF4 residue=0x00.
    # Recalled from memory, confirmed against the crc-catalog crate's documentation of it.
    assert crc8(b"123456789") == 0xF4


@given(st.binary(max_size=200))
def test_crc8_residue_is_zero(data: bytes) -> None:
    # The catalogue's residue 0x00: running the CRC over data followed by its CRC gives 0.
    assert crc8(data + bytes([crc8(data)])) == 0x00


def test_crc8_of_nothing_is_init() -> None:
    assert crc8(b"") == 0x00


# ---- round trips ------------------------------------------------------------------------------


@given(seqs, verbs, args)
def test_command_round_trip(seq: int, verb: str, arg: str) -> None:
    command = Command(seq, verb, arg)
    frame = encode_command(command)
    assert re.fullmatch(rb"[0-9A-F]{4} [A-Z]+( [^ *]+)?\*[0-9A-F]{2}\n", frame)
    assert decode_command(frame) == command


@given(seqs, texts)
def test_ok_reply_round_trip(seq: int, payload: str) -> None:
    payload = payload.strip()
    reply = Reply(seq, True, payload=payload)
    assert decode_reply(encode_reply(reply)) == reply


@given(st.one_of(st.none(), seqs), st.integers(min_value=0, max_value=999), texts)
def test_error_reply_round_trip(seq: int | None, code: int, text: str) -> None:
    text = text.strip()
    reply = Reply(seq, False, code=code, text=text)
    assert decode_reply(encode_reply(reply)) == reply


def test_frame_layout() -> None:
    frame = encode_command(Command(0x00AB, "SET", "1,3"))
    body = b"00AB SET 1,3"
    assert frame == body + b"*" + f"{crc8(body):02X}".encode() + b"\n"
    assert encode_reply(Reply(None, False, code=11, text="bad")).startswith(b"---- ERR 11 bad*")


# ---- corruption -------------------------------------------------------------------------------


@given(seqs, verbs, args, st.data())
def test_any_changed_character_is_caught(
    seq: int, verb: str, arg: str, data: st.DataObject
) -> None:
    frame = encode_command(Command(seq, verb, arg))
    index = data.draw(st.integers(min_value=0, max_value=len(frame) - 2), label="index")
    original = chr(frame[index])
    replacement = data.draw(
        st.sampled_from([chr(c) for c in range(0x20, 0x7F) if chr(c) != original]),
        label="replacement",
    )
    damaged = frame[:index] + replacement.encode() + frame[index + 1 :]
    with pytest.raises(FrameError):
        decode_command(damaged)


def test_flipped_bit_in_body_is_a_checksum_error_with_untrusted_seq() -> None:
    frame = bytearray(encode_command(Command(7, "SET", "1,2")))
    frame[-6] ^= 0x01  # the '1' of "1,2" becomes '0'
    with pytest.raises(FrameError) as caught:
        decode_command(bytes(frame))
    assert caught.value.code is ErrorCode.BAD_CHECKSUM
    assert caught.value.seq is None


@pytest.mark.parametrize(
    ("line", "code"),
    [
        (b"hello\n", ErrorCode.MALFORMED),
        (b"0001 WHO*ZZ\n", ErrorCode.MALFORMED),
        (b"0001 WHO\n", ErrorCode.MALFORMED),
        (b"0001 WHO*00", ErrorCode.MALFORMED),  # no terminator
        (b"0001 WH\xc3\x96*00\n", ErrorCode.MALFORMED),
        (b"0001 WHO\r*00\n", ErrorCode.MALFORMED),
        (b"0001 W*O*00\n", ErrorCode.MALFORMED),
        (b"1" * MAX_COMMAND_LINE + b"\n", ErrorCode.LINE_TOO_LONG),
    ],
)
def test_bad_lines_are_refused(line: bytes, code: ErrorCode) -> None:
    with pytest.raises(FrameError) as caught:
        decode_command(line)
    assert caught.value.code is code


def _sealed(body: str) -> bytes:
    return body.encode() + b"*" + f"{crc8(body.encode()):02X}".encode() + b"\n"


def test_lowercase_checksum_is_refused() -> None:
    bodies = (f"{seq:04X} STATE" for seq in range(100))
    body = next(b for b in bodies if re.search("[A-F]", f"{crc8(b.encode()):02X}"))
    frame = body.encode() + b"*" + f"{crc8(body.encode()):02x}".encode() + b"\n"
    with pytest.raises(FrameError) as caught:
        decode_command(frame)
    assert caught.value.code is ErrorCode.MALFORMED
    assert decode_command(frame.upper()) == Command(int(body[:4], 16), "STATE")


def test_good_checksum_but_bad_grammar_keeps_the_seq() -> None:
    with pytest.raises(FrameError) as caught:
        decode_command(_sealed("00FF set 1"))
    assert caught.value.code is ErrorCode.MALFORMED
    assert caught.value.seq == 0xFF
    with pytest.raises(FrameError) as caught:
        decode_command(_sealed("00FF SET 1 2"))
    assert caught.value.seq == 0xFF


def test_bad_seq_field_is_untrusted() -> None:
    with pytest.raises(FrameError) as caught:
        decode_command(_sealed("12G4 WHO"))
    assert caught.value.seq is None


def test_reply_decoding_refuses_ok_without_seq_and_unknown_status() -> None:
    with pytest.raises(FrameError):
        decode_reply(_sealed("---- OK"))
    with pytest.raises(FrameError):
        decode_reply(_sealed("0001 MAYBE"))
    with pytest.raises(FrameError):
        decode_reply(_sealed("0001 ERR x text"))


# ---- sequence numbers -------------------------------------------------------------------------


def test_sequence_wraps() -> None:
    assert next_seq(0) == 1
    assert next_seq(0xFFFE) == 0xFFFF
    assert next_seq(0xFFFF) == 0
    assert encode_command(Command(0xFFFF, "BEAT")).startswith(b"FFFF BEAT*")
    assert encode_command(Command(0, "BEAT")).startswith(b"0000 BEAT*")


@pytest.mark.parametrize("seq", [-1, 0x10000])
def test_sequence_out_of_range_is_refused(seq: int) -> None:
    with pytest.raises(FrameError, match=r"0\.\.65535"):
        encode_command(Command(seq, "BEAT"))


@given(seqs)
def test_next_seq_stays_in_range_and_advances(seq: int) -> None:
    after = next_seq(seq)
    assert 0 <= after <= 0xFFFF
    assert (after - seq) % 0x10000 == 1


def test_encoder_refuses_bad_verbs_and_args() -> None:
    with pytest.raises(FrameError):
        encode_command(Command(1, "set"))
    with pytest.raises(FrameError):
        encode_command(Command(1, "SET", "1 2"))
    with pytest.raises(FrameError):
        encode_command(Command(1, "SET", "1*2"))
    with pytest.raises(FrameError):
        encode_reply(Reply(None, True))


# ---- payloads ---------------------------------------------------------------------------------


@given(st.frozensets(st.integers(min_value=1, max_value=999), max_size=20))
def test_relay_list_round_trip(relays: frozenset[int]) -> None:
    assert frozenset(parse_relays(format_relays(relays))) == relays


def test_relay_list_format() -> None:
    assert format_relays([]) == "-"
    assert format_relays([5, 1, 3, 1]) == "1,3,5"


@pytest.mark.parametrize("text", ["", "1,,2", "1,x", "-1", "1,2,1", "1;2", " 1"])
def test_bad_relay_lists(text: str) -> None:
    with pytest.raises(FrameError) as caught:
        parse_relays(text)
    assert caught.value.code is ErrorCode.BAD_ARGUMENT


def test_state_info_counts_round_trip() -> None:
    state = BoxState(frozenset({2, 9}), WatchdogMode.ARMED, 250)
    assert format_state(state) == "closed=2,9 wd=armed wd_ms=250"
    assert parse_state(format_state(state)) == state
    info = BoxInfo(16, 4, "maker, model x,SN 1,2.0")
    assert parse_info(format_info(info)) == info
    assert parse_counts(format_counts([0, 12, 3])) == [0, 12, 3]


@pytest.mark.parametrize(
    "payload", ["closed=1 wd=maybe wd_ms=0", "wd=off closed=1 wd_ms=0", "closed=1 wd=off", ""]
)
def test_bad_state_payload(payload: str) -> None:
    with pytest.raises(FrameError):
        parse_state(payload)


def test_watchdog_ms_range() -> None:
    assert parse_watchdog_ms("20") == 20
    assert parse_watchdog_ms("600000") == 600000
    with pytest.raises(FrameError) as caught:
        parse_watchdog_ms("19")
    assert caught.value.code is ErrorCode.OUT_OF_RANGE
    with pytest.raises(FrameError) as caught:
        parse_watchdog_ms("0.5")
    assert caught.value.code is ErrorCode.BAD_ARGUMENT


# ---- the protocol page ------------------------------------------------------------------------

DOC = Path(__file__).resolve().parents[1] / "docs" / "relay-box-protocol.md"


def test_examples_in_the_protocol_page_are_valid_frames() -> None:
    lines = DOC.read_text(encoding="utf-8").splitlines()
    sent = [ln[6:] for ln in lines if ln.startswith("host> ")]
    damaged = [ln[6:] for ln in lines if ln.startswith("host! ")]
    answered = [ln[6:] for ln in lines if ln.startswith("box<  ")]
    assert len(sent) >= 8 and damaged and len(answered) >= 8
    for line in sent:
        assert encode_command(decode_command(line.encode() + b"\n")) == line.encode() + b"\n"
    for line in answered:
        assert encode_reply(decode_reply(line.encode() + b"\n")) == line.encode() + b"\n"
    for line in damaged:
        with pytest.raises(FrameError) as caught:
            decode_command(line.encode() + b"\n")
        assert caught.value.code is ErrorCode.BAD_CHECKSUM


def test_error_codes_in_the_protocol_page_match_the_codec() -> None:
    rows = re.findall(r"^\| (\d\d) \|", DOC.read_text(encoding="utf-8"), flags=re.MULTILINE)
    assert sorted(int(r) for r in rows) == sorted(int(c) for c in ErrorCode)


def test_verbs_in_the_protocol_page_match_the_codec() -> None:
    rows = re.findall(r"^\| `([A-Z]+)` \|", DOC.read_text(encoding="utf-8"), flags=re.MULTILINE)
    assert sorted(rows) == sorted(v.value for v in Verb)
