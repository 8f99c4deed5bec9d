"""Write a flat, deterministic board netlist of about N elements for timing drc and ngspice.

    python bench/generate.py N OUT.cir

The board is a made-up controller board with many indicator branches of every kind that
drc looks for: pin-driven, rail-driven, sinking into a pin, LEDs in series and in
parallel, two-pin diode doubler pumps, plus RC filters and decoupling capacitors, on a
few rails. Cards are written the way schematic exporters write them (plain values with
SPICE suffixes), with a share of PULSE sources and `+` continuation lines. The same N
always gives the same file (fixed seed). A design context OUT.toml is written beside it.
ngspice loads the result (`ngspice -b OUT.cir`).
"""

from __future__ import annotations

import random
import sys
from pathlib import Path

SEED = 20240611

MODELS = """\
.model LED_RED D(IS=7.7e-19 N=2.0 RS=2.4 EG=2.3 XTI=3 BV=5 IBV=10u CJO=15p)
.model LED_GRN D(IS=2.8e-18 N=3.0 RS=14 EG=3.2 XTI=3 BV=5 IBV=10u CJO=30p)
.model LED_WHT D(IS=2.8e-18 N=3.0 RS=14 EG=3.2 XTI=3 BV=5 IBV=10u CJO=30p)
.model LED_IR D(IS=4.7e-16 N=1.5 RS=4.4 EG=1.6 XTI=3 BV=5 IBV=10u CJO=20p)
.model SCHOTTKY D(IS=1.5e-8 N=1.05 RS=1.0 EG=0.69 XTI=2 BV=30 IBV=1u CJO=10p)
.model SIGDIODE D(IS=1.2n N=1.75 RS=0.6 BV=100 IBV=100u CJO=2p)
"""

# (source name, net, volts, range for the config)
RAILS = [
    ("VBAT", "vbat", 3.0, ("2.0 V", "3.3 V")),
    ("V3V3", "v3v3", 3.3, ("3.135 V", "3.465 V")),
    ("V1V8", "v1v8", 1.8, ("1.71 V", "1.89 V")),
]

RESISTORS = ["47", "68", "100", "150", "220", "330", "470", "680", "1k", "1.5k", "2.2k",
             "3.3k", "4.7k", "10k", "22k", "47k", "100k", "1MEG"]
LED_RESISTORS = ["68", "100", "150", "220", "330", "470", "680", "1k", "1.5k"]
CAPACITORS = ["100p", "1n", "10n", "100n", "1u", "4.7u", "10u"]
LEDS_FOR_RAIL = {"vbat": ["LED_RED", "LED_GRN", "LED_IR"], "v3v3": ["LED_RED", "LED_GRN",
                 "LED_WHT", "LED_IR"], "v1v8": ["LED_RED", "LED_IR"]}

# What a designer puts on the board. Each value passes drc's check at every corner of the
# board's design context (config_text): found once by running candidate E24 values of each
# block through drc, and taken from the middle of the passing range. A few values per
# (rail, LED), as real boards reuse parts. Combinations with no passing value (a red LED on
# 1.8 V; green on the coin cell's 2.0 V end of life, unpumped) are not designed in.
DESIGNED_R = {  # (rail, LED) -> the series resistor of one LED
    ("vbat", "LED_RED"): ["120", "150", "180"], ("vbat", "LED_IR"): ["220", "330", "470", "680"],
    ("v3v3", "LED_RED"): ["220", "330", "470", "680"], ("v3v3", "LED_GRN"): ["68", "100", "150", "220"],
    ("v3v3", "LED_WHT"): ["68", "100", "150", "220"], ("v3v3", "LED_IR"): ["330", "470", "680", "1k"],
    ("v1v8", "LED_IR"): ["100", "150", "220", "330"],
}
DESIGNED_SHARED_R = {  # (rail, LED) -> one resistor that two LEDs side by side share
    ("vbat", "LED_RED"): ["68", "100"], ("vbat", "LED_IR"): ["100", "150", "220"],
    ("v3v3", "LED_RED"): ["150", "220", "330"], ("v3v3", "LED_GRN"): ["47", "68", "100"],
    ("v3v3", "LED_WHT"): ["47", "68", "100"], ("v3v3", "LED_IR"): ["150", "220", "330"],
    ("v1v8", "LED_IR"): ["68", "100", "150"],
}
DESIGNED_TOGGLED_R = {  # (rail, LED) -> the series resistor of one LED on a toggling pin
    ("vbat", "LED_RED"): ["39", "47"], ("vbat", "LED_IR"): ["150", "220", "330"],
    ("v3v3", "LED_RED"): ["100", "150", "220"], ("v3v3", "LED_GRN"): ["56", "68", "100"],
    ("v3v3", "LED_WHT"): ["56", "68", "100"], ("v3v3", "LED_IR"): ["220", "330", "470"],
    ("v1v8", "LED_IR"): ["68", "100", "150"],
}
DESIGNED_SERIES_R = ["68", "100", "150"]     # two IR LEDs in series on 3.3 V
DESIGNED_PERIOD = "0.25m"    # 4 kHz: above IEEE 1789's no-observable-effect line
FAULTY_SHARE = 0.05          # blocks drawn at random, as earlier boards were: the findings


class Board:
    """Accumulates cards with unique names and counts the elements."""

    def __init__(self, rng: random.Random) -> None:
        self.rng = rng
        self.faulty = True       # this block's values drawn at random, not designed
        self.lines: list[str] = []
        self.elements = 0
        self.counter: dict[str, int] = {}

    def name(self, letter: str) -> str:
        self.counter[letter] = self.counter.get(letter, 0) + 1
        return f"{letter}{self.counter[letter]}"

    def card(self, text: str) -> None:
        self.lines.append(text)
        self.elements += 1

    def comment(self, text: str) -> None:
        self.lines.append("* " + text)

    def two_terminal(self, letter: str, a: str, b: str, value: str) -> str:
        """A resistor or capacitor; about one in twelve split over a continuation line."""
        ref = self.name(letter)
        if self.rng.random() < 1 / 12:
            self.lines.append(f"{ref} {a} {b}")
            self.lines.append(f"+ {value}")
            self.elements += 1
        else:
            self.card(f"{ref} {a} {b} {value}")
        return ref

    def pin(self, net: str, volts: float, toggle: bool, delayed: bool = False,
            period: str = "0.5m") -> str:
        ref = self.name("VP")
        if toggle:
            half = {"0.25m": "0.125m", "0.5m": "0.25m", "1m": "0.5m", "100m": "20m"}[period]
            delay = half if delayed else "0"
            if self.rng.random() < 0.25:
                self.lines.append(f"{ref} {net} 0 PULSE(0 {volts:g} {delay} 10n 10n")
                self.lines.append(f"+ {half} {period})")
                self.elements += 1
            else:
                self.card(f"{ref} {net} 0 PULSE(0 {volts:g} {delay} 10n 10n {half} {period})")
        else:
            self.card(f"{ref} {net} 0 DC {volts:g}")
        return ref


def rail(rng: random.Random) -> tuple[str, str, float, tuple[str, str]]:
    return rng.choice(RAILS)


def led_and_resistor(b: Board, table: dict) -> tuple[str, float, str, str]:
    """A rail, its volts, an LED model and a series resistor: designed (from `table`), or
    for a faulty block any LED of the rail with any resistor."""
    if b.faulty:
        _, net, volts, _ = rail(b.rng)
        return net, volts, b.rng.choice(LEDS_FOR_RAIL[net]), b.rng.choice(LED_RESISTORS)
    net, model = b.rng.choice(list(table))
    volts = next(v for _, n, v, _ in RAILS if n == net)
    return net, volts, model, b.rng.choice(table[(net, model)])


def block_pin_driven(b: Board, k: int) -> None:
    toggle = b.rng.random() < 0.3
    net, volts, model, resistor = led_and_resistor(b, DESIGNED_TOGGLED_R if toggle else DESIGNED_R)
    pin = f"pd{k}"
    period = b.rng.choice(["0.5m", "1m", "100m"]) if b.faulty else DESIGNED_PERIOD
    b.pin(pin, volts, toggle=toggle, period=period)
    b.two_terminal("R", pin, f"pd{k}_a", resistor)
    b.card(f"{b.name('D')} pd{k}_a 0 {model}")


def block_rail_driven(b: Board, k: int) -> None:
    net, _, model, resistor = led_and_resistor(b, DESIGNED_R)
    b.two_terminal("R", net, f"rd{k}_a", resistor)
    b.card(f"{b.name('D')} rd{k}_a 0 {model}")


def block_sinking(b: Board, k: int) -> None:
    net, _, model, resistor = led_and_resistor(b, DESIGNED_R)
    b.card(f"{b.name('D')} {net} sk{k}_k {model}")
    b.two_terminal("R", f"sk{k}_k", f"sk{k}_p", resistor)
    b.pin(f"sk{k}_p", 0.0, toggle=False)


def block_series(b: Board, k: int) -> None:
    resistor = b.rng.choice(["22", "33", "47", "68"] if b.faulty else DESIGNED_SERIES_R)
    b.two_terminal("R", "v3v3", f"se{k}_a", resistor)
    b.card(f"{b.name('D')} se{k}_a se{k}_m LED_IR")
    b.card(f"{b.name('D')} se{k}_m 0 LED_IR")


def block_parallel(b: Board, k: int) -> None:
    own = b.rng.random() < 0.5    # one resistor per LED, or two LEDs sharing one
    net, volts, model, resistor = led_and_resistor(b, DESIGNED_R if own else DESIGNED_SHARED_R)
    pin = f"pl{k}"
    b.pin(pin, volts, toggle=False)
    if own:
        for j in range(2):
            b.two_terminal("R", pin, f"pl{k}_{j}", resistor if j == 0 or not b.faulty
                           else b.rng.choice(LED_RESISTORS))
            b.card(f"{b.name('D')} pl{k}_{j} 0 {model}")
    else:
        b.two_terminal("R", pin, f"pl{k}_a", resistor)
        b.card(f"{b.name('D')} pl{k}_a 0 {model}")
        b.card(f"{b.name('D')} pl{k}_a 0 {model}")


# A board reuses a few standard pump cells (rail, pumping capacitor, LED, series resistor,
# the pin's series resistor, a reservoir capacitor), as real designs reuse a validated cell;
# drc simulates each distinct cell once. The designed cells pass drc's check at every corner
# (found as DESIGNED_R was); the faulty ones are those of earlier boards, straight from the pin.
PUMP_CELLS = [(RAILS[0], "10u", "LED_WHT", "47", None, None),
              (RAILS[2], "10u", "LED_WHT", "22", None, None),
              (RAILS[2], "22u", "LED_GRN", "47", None, None),
              (RAILS[0], "4.7u", "LED_GRN", "68", None, None)]
DESIGNED_PUMP_CELLS = [(RAILS[0], "10u", "LED_WHT", "22", "120", None),
                       (RAILS[0], "22u", "LED_GRN", "47", "120", "2.2u"),
                       (RAILS[0], "10u", "LED_GRN", "10", "120", "2.2u")]


def block_pump(b: Board, k: int) -> None:
    """A doubler: charge diode from the rail, capacitor lifted by a toggling pin (through a
    series resistor, in the designed cells), transfer diode, a reservoir capacitor in some,
    then the LED and its resistor to ground."""
    cell = b.rng.choice(PUMP_CELLS if b.faulty else DESIGNED_PUMP_CELLS)
    (_, net, volts, _), cap, led, resistor, pin_resistor, reservoir = cell
    b.pin(f"pu{k}_pa", volts, toggle=True, period="0.5m" if b.faulty else DESIGNED_PERIOD)
    lifted = f"pu{k}_pa"
    if pin_resistor is not None:
        lifted = f"pu{k}_pr"
        b.two_terminal("R", f"pu{k}_pa", lifted, pin_resistor)
    b.card(f"{b.name('D')} {net} pu{k}_x SCHOTTKY")
    b.two_terminal("C", lifted, f"pu{k}_x", cap)
    b.card(f"{b.name('D')} pu{k}_x pu{k}_o SCHOTTKY")
    if reservoir is not None:
        b.two_terminal("C", f"pu{k}_o", "0", reservoir)
    b.card(f"{b.name('D')} pu{k}_o pu{k}_k {led}")
    b.two_terminal("R", f"pu{k}_k", "0", resistor)


def block_rc(b: Board, k: int) -> None:
    _, net, _, _ = rail(b.rng)
    b.two_terminal("R", net, f"rc{k}", b.rng.choice(RESISTORS))
    b.two_terminal("C", f"rc{k}", "0", b.rng.choice(CAPACITORS))


def block_decoupling(b: Board, k: int) -> None:
    _, net, _, _ = rail(b.rng)
    b.two_terminal("C", net, "0", b.rng.choice(["100n", "100n", "1u", "10u"]))


# block, weight (share of blocks)
BLOCKS = [
    (block_pin_driven, 22), (block_rail_driven, 14), (block_sinking, 8), (block_series, 5),
    (block_parallel, 6), (block_pump, 7), (block_rc, 18), (block_decoupling, 20),
]


def generate(n: int, faulty: float = FAULTY_SHARE) -> tuple[str, int]:
    """The netlist text of about n elements, and its exact element count. A share `faulty`
    of the blocks (1.0: all of them) take random values; the rest take designed ones."""
    rng = random.Random(SEED)
    board = Board(rng)
    board.lines.append(f"Benchmark board of about {n} elements (drc bench/generate.py, seed {SEED}, "
                       f"{faulty:.0%} of its blocks drawn at random)")
    board.comment("a made-up controller board: indicators, doubler pumps, filters, decoupling")
    board.lines.extend(MODELS.splitlines())
    for src, net, volts, _ in RAILS:
        board.card(f"{src} {net} 0 DC {volts:g}")
    funcs = [f for f, _ in BLOCKS]
    weights = [w for _, w in BLOCKS]
    k = 0
    while board.elements < n:
        k += 1
        if k % 500 == 1:
            board.comment(f"sheet {k // 500 + 1}")
        board.faulty = rng.random() < faulty
        rng.choices(funcs, weights)[0](board, k)
    board.lines.append(".end")
    return "\n".join(board.lines) + "\n", board.elements


def config_text() -> str:
    out = ["# Design context for a generated benchmark board (bench/generate.py)."]
    for src, _, volts, (low, high) in RAILS:
        out += ["", f"[supply.{src}]", f'source = "{src}"', f'range = ["{low}", "{high}"]',
                f'nominal = "{volts:g} V"']
    colours = {"LED_RED": "red", "LED_GRN": "green", "LED_WHT": "white", "LED_IR": "infrared"}
    for model, colour in colours.items():
        out += ["", f"[led.{model}]", f'model = "{model}"', f'colour = "{colour}"',
                'visible_current = "0.5 mA"', 'max_current = "20 mA"']
    out += ["", "[ambient]", 'temperature = ["-20 degC", "60 degC"]',
            "", "[tolerance]", 'resistor = "5 %"', 'capacitor = "20 %"', ""]
    return "\n".join(out)


def main(argv: list[str]) -> int:
    faulty = FAULTY_SHARE
    if "--faulty" in argv[:-1]:
        k = argv.index("--faulty")
        faulty = float(argv[k + 1])
        del argv[k:k + 2]
    if len(argv) != 3 or not 0.0 <= faulty <= 1.0:
        print("usage: python bench/generate.py N OUT.cir [--faulty SHARE]   (SHARE 0 to 1, "
              f"default {FAULTY_SHARE})", file=sys.stderr)
        return 2
    n = int(argv[1].replace("_", ""))
    out = Path(argv[2])
    out.parent.mkdir(parents=True, exist_ok=True)
    text, count = generate(n, faulty)
    out.write_text(text)
    out.with_suffix(".toml").write_text(config_text())
    print(f"{out}: {count} elements, {text.count(chr(10))} lines")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv))
