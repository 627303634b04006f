"""The generic SCPI core against the standards it implements.

Sources: SCPI-1999 (Vol. 1 "Syntax and Style" §6 headers and the path rule, §7 parameters; Vol. 2
§21.8 SYSTem:ERRor and the error table), IEEE 488.2-1992 (§7.7 program data, §10 common commands,
§11 status reporting).  Section numbers are from memory; the facts checked are the standards'.
"""

from __future__ import annotations

import math

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from drivers.base import InstrumentIdentity
from rig.sim.scpi import Call, Handler, ScpiInstrument, line_has_query, matches_pattern
from rig.sim.scpi_errors import STANDARD_ERRORS, ScpiError

IDENTITY = InstrumentIdentity("Test Works", "T-1", "0042", "1.0")


class Toy(ScpiInstrument):
    """A small instrument with one command of each parameter kind, recording what it was given."""

    def __init__(self) -> None:
        super().__init__(IDENTITY)
        self.calls: list[tuple[str, object]] = []
        self.resets = 0
        add = self.tree.add
        add("[SENSe:]VOLTage[:DC]:RANGe", on_set=self._set("range"), on_query=self._get("range"))
        add("[SENSe:]VOLTage[:DC]:NPLCycles", on_set=self._set("nplc"))
        add("OUTPut#2[:STATe]", on_set=self._output, on_query=lambda c: "1")
        add("MEASure:VOLTage[:DC]?", on_query=lambda c: "+1.00000000E+00")
        add("LEVel", on_set=self._level)
        add("MODE", on_set=lambda c: self._record("mode", c.word(0, ("FAST", "SLOW"))))
        add("FLAG", on_set=lambda c: self._record("flag", c.boolean(0)))
        add("TEXT", on_set=lambda c: self._record("text", c.string(0)))
        add("TWO", on_set=self._two)

    def reset_device(self) -> None:
        self.resets += 1

    def _record(self, what: str, value: object) -> None:
        self.calls.append((what, value))

    def _set(self, what: str) -> Handler:
        def handler(call: Call) -> None:
            call.count(1, 1)
            self._record(what, call.number(0, unit="V", low=0.0, high=1000.0))

        return handler

    def _get(self, what: str) -> Handler:
        def handler(call: Call) -> str:
            call.count(0, 0)
            return what

        return handler

    def _output(self, call: Call) -> None:
        call.count(1, 1)
        self._record("output", (call.suffixes, call.boolean(0)))

    def _level(self, call: Call) -> None:
        call.count(1, 1)
        self._record("level", call.number(0, unit="V", low=0.0, high=10.0))

    def _two(self, call: Call) -> None:
        call.count(2, 2)
        self._record("two", (call.number(0, low=0, high=9), call.number(1, low=0, high=9)))


def next_error(inst: ScpiInstrument) -> int:
    reply = inst.handle("SYST:ERR?")
    assert reply is not None
    return int(reply.split(",")[0])


def errors_of(line: str) -> list[int]:
    inst = Toy()
    inst.handle(line)
    codes = []
    while (code := next_error(inst)) != 0:
        codes.append(code)
    return codes


# ------------------------------------------------------------------------- headers


@pytest.mark.parametrize(
    "line",
    [
        "SYST:ERR?",  # short forms (SCPI-1999 Vol. 1 §6.2.1)
        "SYSTEM:ERROR?",  # long forms
        "system:error:next?",  # any case; optional node given
        "SyStEm:ErR?",  # mixed forms and case
        ":SYST:ERR:NEXT?",  # leading colon = root
    ],
)
def test_short_long_forms_and_case_are_accepted(line: str) -> None:
    # SCPI-1999 Vol. 1 §6.2.1: only the short or the long form, in any case.
    assert Toy().handle(line) == '0,"No error"'


@pytest.mark.parametrize("line", ["SYSTE:ERR?", "SYS:ERR?", "SYSTEMS:ERR?", "SYST:ERRO?"])
def test_forms_between_short_and_long_are_undefined(line: str) -> None:
    # SCPI-1999 Vol. 1 §6.2.1: "nothing in between"; -113 Undefined header.
    inst = Toy()
    assert inst.handle(line) is None
    assert next_error(inst) == -113


@pytest.mark.parametrize(
    "line",
    ["SENS:VOLT:DC:RANG 10", "VOLT:RANG 10", "SENSE:VOLTAGE:RANGE 10", "volt:dc:rang 10"],
)
def test_optional_nodes_may_be_left_out(line: str) -> None:
    # SCPI-1999 Vol. 1 §6.2.4: bracketed nodes are optional.
    inst = Toy()
    inst.handle(line)
    assert inst.calls == [("range", 10.0)]
    assert next_error(inst) == 0


def test_query_of_optional_default_node() -> None:
    inst = Toy()
    assert inst.handle("MEAS:VOLT?") == inst.handle("MEASURE:VOLTAGE:DC?") == "+1.00000000E+00"


def test_command_form_of_a_query_only_header_is_undefined() -> None:
    inst = Toy()
    inst.handle("MEAS:VOLT")
    assert next_error(inst) == -113


def test_numeric_suffix_and_its_range() -> None:
    # SCPI-1999 Vol. 1 §6.2.5: a missing suffix means 1; out of range is -114.
    inst = Toy()
    inst.handle("OUTP ON;:OUTP2 OFF;:OUTPUT1:STATE 1")
    assert inst.calls == [
        ("output", ((1,), True)),
        ("output", ((2,), False)),
        ("output", ((1,), True)),
    ]
    assert next_error(inst) == 0
    inst.handle("OUTP3 ON")
    assert next_error(inst) == -114
    inst.handle("LEV2 1")  # no suffix allowed at all on LEVel
    assert next_error(inst) == -114


def test_compound_line_path_rule() -> None:
    # SCPI-1999 Vol. 1 §6.2.4: after ';' the path stays at the last node's parent; ':' is the root.
    inst = Toy()
    inst.handle("VOLT:RANG 10;NPLC 1;RANG 100")
    assert inst.calls == [("range", 10.0), ("nplc", 1.0), ("range", 100.0)]
    assert next_error(inst) == 0
    inst.handle("VOLT:RANG 10;LEV 1")  # LEVel is not below VOLTage
    assert next_error(inst) == -113
    inst.calls.clear()
    inst.handle("VOLT:RANG 10;:LEV 1")
    assert inst.calls == [("range", 10.0), ("level", 1.0)]


def test_common_commands_do_not_move_the_path() -> None:
    # IEEE 488.2-1992 §7.6.1: a common command in a compound line leaves the path alone.
    inst = Toy()
    inst.handle("VOLT:RANG 10;*CLS;NPLC 2")
    assert inst.calls == [("range", 10.0), ("nplc", 2.0)]
    assert next_error(inst) == 0


def test_several_queries_answer_in_one_line() -> None:
    # IEEE 488.2-1992 §8.4.1: response message units are separated by ';'.
    inst = Toy()
    assert inst.handle("*IDN?;VOLT:RANG?") == "Test Works,T-1,0042,1.0;range"
    assert inst.handle("VOLT:RANG 1") is None


def test_matches_pattern_for_function_strings() -> None:
    assert matches_pattern("VOLTage[:DC]", "VOLT")
    assert matches_pattern("VOLTage[:DC]", "voltage:dc")
    assert not matches_pattern("VOLTage[:DC]", "VOLT:AC")
    assert not matches_pattern("RESistance", "FRES")


def test_line_has_query_ignores_quoted_question_marks() -> None:
    assert line_has_query("*IDN?")
    assert line_has_query('TEXT "a";MEAS:VOLT?')
    assert not line_has_query('TEXT "what?"')


# ------------------------------------------------------------------------- parameters


@pytest.mark.parametrize(
    ("line", "volts"),
    [
        ("LEV 5", 5.0),
        ("LEV 5V", 5.0),
        ("LEV 500 mV", 0.5),  # IEEE 488.2-1992 §7.7.3: M is milli
        ("LEV 2.5E+0", 2.5),
        ("LEV .5", 0.5),
        ("LEV +1e-3", 1e-3),
        ("LEV 7000 UV", 7e-3),
        ("LEV MIN", 0.0),
        ("LEV MAXIMUM", 10.0),
    ],
)
def test_numbers_with_suffixes_and_special_words(line: str, volts: float) -> None:
    inst = Toy()
    inst.handle(line)
    assert next_error(inst) == 0
    ((what, value),) = inst.calls
    assert what == "level" and math.isclose(float(value), volts)  # type: ignore[arg-type]


def test_mohm_means_megohm() -> None:
    # IEEE 488.2-1992 §7.7.3.4: MOHM and MHZ are the exceptions where M means mega.
    from rig.sim.scpi import suffix_multiplier

    assert suffix_multiplier("MOHM", "OHM") == 1e6
    assert suffix_multiplier("KOHM", "OHM") == 1e3
    assert suffix_multiplier("MA", "A") == 1e-3  # milliampere
    assert suffix_multiplier("MAV", "V") == 1e6  # MA as a multiplier is mega


@pytest.mark.parametrize(
    ("line", "flag"), [("FLAG ON", True), ("FLAG off", False), ("FLAG 1", True), ("FLAG 0", False)]
)
def test_booleans(line: str, flag: bool) -> None:
    # SCPI-1999 Vol. 1 §7.3: ON/OFF or a number, non-zero after rounding meaning ON.
    inst = Toy()
    inst.handle(line)
    assert inst.calls == [("flag", flag)]


def test_strings_keep_doubled_quotes() -> None:
    # IEEE 488.2-1992 §7.7.5: a quote inside a string is doubled; either quote character delimits.
    inst = Toy()
    inst.handle('TEXT "say ""hi"";ok"')
    inst.handle("TEXT 'single'")
    assert inst.calls == [("text", 'say "hi";ok'), ("text", "single")]


def test_character_data_by_short_or_long_form() -> None:
    inst = Toy()
    inst.handle("MODE FAST;MODE slow")
    assert inst.calls == [("mode", "FAST"), ("mode", "SLOW")]


# ------------------------------------------------------------------------- every error path


@pytest.mark.parametrize(
    ("line", "code"),
    [
        ("LEV 1 2", -103),  # two data elements without a comma: invalid separator
        ("LEV @", -101),  # invalid character
        ("VOLT::RANG 10", -102),  # syntax error
        ("VOLT:RANG,10", -103),  # invalid separator
        ("*CLS;;*CLS", -102),  # empty message unit
        ("TWO 1,,2", -102),  # empty parameter
        ('LEV "5"', -104),  # data type error: string where a number goes
        ("TEXT 5", -104),
        ("LEV 1,2", -108),  # parameter not allowed
        ("LEV", -109),  # missing parameter
        ("TWO 1", -109),
        ("VOLTAGEVOLTAGE:RANG 1", -112),  # program mnemonic too long (IEEE 488.2 §7.6.1.4)
        ("NOPE 1", -113),  # undefined header
        ("*XYZ", -113),
        ("OUTP9 ON", -114),  # header suffix out of range
        ("LEV 1.2.3", -120),  # numeric data error
        ("LEV 1E999", -123),  # exponent too large
        ("LEV 5 KG", -131),  # invalid suffix for volts
        ("TWO 1 V,2", -138),  # suffix not allowed
        ("MODE FA$T", -141),  # invalid character data
        ("MODE ABCDEFGHIJKLM", -144),  # character data too long (12 characters max)
        ('TEXT "unterminated', -151),  # invalid string data
        ("LEV 11", -222),  # data out of range
        ("LEV -1", -222),
        ("*ESE 256", -222),
        ("MODE MEDIUM", -224),  # illegal parameter value
        ("FLAG MAYBE", -224),
        ("*IDN? 1", -108),
        ("*RST 1", -108),
    ],
)
def test_malformed_lines_push_the_standard_error(line: str, code: int) -> None:
    # Error numbers per SCPI-1999 Vol. 2 §21.8 (command errors -1xx, execution errors -2xx).
    assert errors_of(line) == [code]


def test_rest_of_a_line_is_skipped_after_an_error_but_the_instrument_keeps_serving() -> None:
    inst = Toy()
    inst.handle("NOPE;LEV 1")
    assert inst.calls == []
    assert next_error(inst) == -113
    inst.handle("LEV 1")
    assert inst.calls == [("level", 1.0)]


def test_query_unterminated() -> None:
    # IEEE 488.2-1992 §6.3.2.2; SCPI-1999 -420 "Query UNTERMINATED".
    inst = Toy()
    inst.unterminated("MEAS:VOLT?")
    assert inst.handle("SYST:ERR?") == '-420,"Query UNTERMINATED"'
    inst.unterminated("LEV 1")  # an unterminated command is simply not executed
    assert next_error(inst) == 0
    assert inst.calls == []


def test_error_texts_follow_scpi_1999() -> None:
    # Texts transcribed from the SCPI-1999 Vol. 2 §21.8 error table (via FIELD-NOTES).
    standard = {
        -100: "Command error",
        -101: "Invalid character",
        -102: "Syntax error",
        -103: "Invalid separator",
        -104: "Data type error",
        -108: "Parameter not allowed",
        -109: "Missing parameter",
        -113: "Undefined header",
        -114: "Header suffix out of range",
        -120: "Numeric data error",
        -200: "Execution error",
        -221: "Settings conflict",
        -222: "Data out of range",
        -224: "Illegal parameter value",
        -230: "Data corrupt or stale",
        -240: "Hardware error",
        -350: "Queue overflow",
        -363: "Input buffer overrun",
        -400: "Query error",
        -410: "Query INTERRUPTED",
        -420: "Query UNTERMINATED",
        -430: "Query DEADLOCKED",
    }
    for code, text in standard.items():
        assert STANDARD_ERRORS[code] == text, code
    # The reply format <code>,"<text>" (SCPI-1999 Vol. 2 §21.8.8).
    assert errors_reply("LEV 11").startswith('-222,"Data out of range')
    assert (
        ScpiError(-100, 'a "quoted" word').formatted() == '-100,"Command error;a ""quoted"" word"'
    )


def errors_reply(line: str) -> str:
    inst = Toy()
    inst.handle(line)
    reply = inst.handle("SYSTEM:ERROR:NEXT?")
    assert reply is not None
    return reply


# ------------------------------------------------------------------------- error queue


def test_queue_is_fifo_and_empty_reads_no_error() -> None:
    # SCPI-1999 Vol. 2 §21.8: first in, first out; 0,"No error" when empty.
    inst = Toy()
    inst.handle("NOPE")
    inst.handle("LEV 11")
    inst.handle("LEV")
    assert [next_error(inst) for _ in range(4)] == [-113, -222, -109, 0]
    assert inst.handle("SYST:ERR?") == '0,"No error"'


def test_queue_overflow_replaces_the_last_entry_with_minus_350() -> None:
    # SCPI-1999 Vol. 2 §21.8.1: on overflow the most recent error is replaced by -350.
    inst = Toy()
    for _ in range(inst.errors.depth + 5):
        inst.handle("LEV 11")
    assert inst.handle("SYST:ERR:COUN?") == str(inst.errors.depth)
    codes = [next_error(inst) for _ in range(inst.errors.depth + 1)]
    assert codes == [-222] * (inst.errors.depth - 1) + [-350, 0]


def test_cls_clears_the_queue_and_rst_does_not() -> None:
    # IEEE 488.2-1992 §10.3 (*CLS) and §10.32 (*RST does not touch the queues).
    inst = Toy()
    inst.handle("NOPE")
    inst.handle("*RST")
    assert inst.resets == 1
    assert next_error(inst) == -113
    inst.handle("NOPE")
    inst.handle("*CLS")
    assert next_error(inst) == 0


# ------------------------------------------------------------------------- status registers


def esr(inst: ScpiInstrument) -> int:
    reply = inst.handle("*ESR?")
    assert reply is not None
    return int(reply)


def test_power_on_bit_then_esr_clears_on_read() -> None:
    # IEEE 488.2-1992 §11.5.1: bit 7 PON is set at power on; *ESR? reads and clears.
    inst = Toy()
    assert esr(inst) == 0x80
    assert esr(inst) == 0


@pytest.mark.parametrize(
    ("line", "bit"),
    [("NOPE", 5), ("LEV 11", 4), ("LEV 1", None)],
)
def test_errors_set_their_esr_bit(line: str, bit: int | None) -> None:
    # IEEE 488.2-1992 §11.5.1.1: bit 5 command error, bit 4 execution error.
    inst = Toy()
    esr(inst)
    inst.handle(line)
    assert esr(inst) == (0 if bit is None else 1 << bit)


def test_query_and_device_errors_set_bits_2_and_3() -> None:
    inst = Toy()
    esr(inst)
    inst.unterminated("*IDN?")  # -420: query error, bit 2
    inst.push_error(-300)  # device-specific, bit 3
    assert esr(inst) == (1 << 2) | (1 << 3)


def test_opc_sets_bit_0_and_opc_query_answers_1() -> None:
    # IEEE 488.2-1992 §10.18, §10.19.
    inst = Toy()
    esr(inst)
    inst.handle("*OPC")
    assert esr(inst) == 1
    assert inst.handle("*OPC?") == "1"
    assert inst.handle("*TST?") == "0"  # §10.38: 0 means the self-test passed


def test_status_byte_bits() -> None:
    # IEEE 488.2-1992 §11.2; SCPI-1999 Vol. 1 §9.1: STB bit 2 error queue not empty, bit 4 MAV,
    # bit 5 ESB (ESR & ESE), bit 6 MSS (STB & SRE).
    inst = Toy()
    esr(inst)
    assert inst.handle("*STB?") == "0"
    assert inst.handle("*IDN?;*STB?") == "Test Works,T-1,0042,1.0;16"  # a reply is waiting: MAV
    inst.handle("NOPE")
    assert inst.handle("*STB?") == str(1 << 2)
    inst.handle("*ESE 32")
    assert inst.handle("*ESE?") == "32"
    assert inst.handle("*STB?") == str((1 << 2) | (1 << 5))
    inst.handle("*SRE 4")
    assert inst.handle("*STB?") == str((1 << 2) | (1 << 5) | (1 << 6))
    inst.handle("*CLS")  # clears ESR and queue, not the enable registers (§10.3)
    assert inst.handle("*STB?") == "0"
    assert inst.handle("*ESE?") == "32" and inst.handle("*SRE?") == "4"


# ------------------------------------------------------------------------- robustness


@settings(max_examples=300, deadline=None)
@given(st.text(alphabet=st.characters(min_codepoint=0x20, max_codepoint=0xFF), max_size=60))
def test_any_line_leaves_the_instrument_serving(line: str) -> None:
    inst = Toy()
    inst.handle(line)
    assert inst.handle("*IDN?") == "Test Works,T-1,0042,1.0"
    for _ in range(25):
        reply = inst.handle("SYST:ERR?")
        assert reply is not None
        code = int(reply.split(",")[0])
        assert code == 0 or code in STANDARD_ERRORS, reply
        assert code != -300, f"internal failure on {line!r}: {reply}"
        if code == 0:
            break
    else:
        pytest.fail("error queue did not empty")


@settings(max_examples=100, deadline=None)
@given(
    st.lists(st.sampled_from(["SENS", "SENSE", "sense", "SeNsE", ""]), min_size=1, max_size=1),
    st.sampled_from(["VOLT", "VOLTAGE", "volt", "Voltage"]),
    st.sampled_from(["", ":DC", ":dc"]),
    st.sampled_from(["RANG", "RANGE", "range", "RaNg"]),
)
def test_every_spelling_of_a_header_resolves(
    sense: list[str], volt: str, dc: str, rang: str
) -> None:
    header = ":".join(p for p in (sense[0], volt + dc, rang) if p)
    inst = Toy()
    inst.handle(f"{header} 10")
    assert inst.calls == [("range", 10.0)]
