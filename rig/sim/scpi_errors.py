"""The standard SCPI error numbers and texts, and the error a command handler raises.

The simulated instruments report errors exactly as SCPI-1999 (Vol. 2, chapter 21, "Error/Event
Queue") spells them, so a driver tested against them is tested against the standard wording and
not against texts we made up.
"""

from __future__ import annotations

#: Standard error/event numbers and their texts (SCPI-1999 Vol. 2 §21.8; IEEE 488.2-1992 §11.5).
STANDARD_ERRORS: dict[int, str] = {
    0: "No error",
    # Command errors, -100 .. -199: the parser did not understand the message (ESR bit 5).
    -100: "Command error",
    -101: "Invalid character",
    -102: "Syntax error",
    -103: "Invalid separator",
    -104: "Data type error",
    -105: "GET not allowed",
    -108: "Parameter not allowed",
    -109: "Missing parameter",
    -110: "Command header error",
    -111: "Header separator error",
    -112: "Program mnemonic too long",
    -113: "Undefined header",
    -114: "Header suffix out of range",
    -120: "Numeric data error",
    -121: "Invalid character in number",
    -123: "Exponent too large",
    -124: "Too many digits",
    -128: "Numeric data not allowed",
    -130: "Suffix error",
    -131: "Invalid suffix",
    -134: "Suffix too long",
    -138: "Suffix not allowed",
    -140: "Character data error",
    -141: "Invalid character data",
    -144: "Character data too long",
    -148: "Character data not allowed",
    -150: "String data error",
    -151: "Invalid string data",
    -158: "String data not allowed",
    # Execution errors, -200 .. -299: understood but could not be done (ESR bit 4).
    -200: "Execution error",
    -210: "Trigger error",
    -211: "Trigger ignored",
    -213: "Init ignored",
    -220: "Parameter error",
    -221: "Settings conflict",
    -222: "Data out of range",
    -223: "Too much data",
    -224: "Illegal parameter value",
    -230: "Data corrupt or stale",
    -231: "Data questionable",
    -240: "Hardware error",
    -241: "Hardware missing",
    # Device-specific errors, -300 .. -399 (ESR bit 3).
    -300: "Device-specific error",
    -310: "System error",
    -330: "Self-test failed",
    -350: "Queue overflow",
    -363: "Input buffer overrun",
    # Query errors, -400 .. -499 (ESR bit 2).
    -400: "Query error",
    -410: "Query INTERRUPTED",
    -420: "Query UNTERMINATED",
    -430: "Query DEADLOCKED",
    -440: "Query UNTERMINATED after indefinite response",
}


def error_text(code: int) -> str:
    """The standard text for ``code``; the text of its class for a code the table does not hold."""
    if code in STANDARD_ERRORS:
        return STANDARD_ERRORS[code]
    if code > 0:
        return "Device-specific error"
    family = -((-code) // 100 * 100)
    return STANDARD_ERRORS.get(family, "Device-specific error")


def esr_bit(code: int) -> int | None:
    """The standard event status register bit an error sets (IEEE 488.2-1992 §11.5.1.1)."""
    if code > 0 or -399 <= code <= -300:
        return 3  # device-dependent error
    if -199 <= code <= -100:
        return 5  # command error
    if -299 <= code <= -200:
        return 4  # execution error
    if -499 <= code <= -400:
        return 2  # query error
    return None


class ScpiError(Exception):
    """Raised inside a command handler; the instrument queues it and keeps serving."""

    def __init__(self, code: int, detail: str = "") -> None:
        self.code = code
        self.detail = detail
        super().__init__(self.formatted())

    @property
    def text(self) -> str:
        return error_text(self.code)

    def formatted(self) -> str:
        """``<code>,"<text>[;<detail>]"`` as ``SYSTem:ERRor?`` answers it (quotes doubled)."""
        body = self.text if not self.detail else f"{self.text};{self.detail}"
        return f'{self.code},"{body.replace(chr(34), chr(34) * 2)}"'
