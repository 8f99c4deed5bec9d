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


class Board:
    """Accumulates cards with unique names and counts the elements."""

    def __init__(self, rng: random.Random) -> None:
        self.rng = rng
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
            half = {"0.5m": "0.25m", "1m": "0.5m", "100m": "20m"}[period]
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


def block_pin_driven(b: Board, k: int) -> None:
    src, net, volts, _ = rail(b.rng)
    pin = f"pd{k}"
    b.pin(pin, volts, toggle=b.rng.random() < 0.3,
          period=b.rng.choice(["0.5m", "1m", "100m"]))
    b.two_terminal("R", pin, f"pd{k}_a", b.rng.choice(LED_RESISTORS))
    b.card(f"{b.name('D')} pd{k}_a 0 {b.rng.choice(LEDS_FOR_RAIL[net])}")


def block_rail_driven(b: Board, k: int) -> None:
    _, net, _, _ = rail(b.rng)
    b.two_terminal("R", net, f"rd{k}_a", b.rng.choice(LED_RESISTORS))
    b.card(f"{b.name('D')} rd{k}_a 0 {b.rng.choice(LEDS_FOR_RAIL[net])}")


def block_sinking(b: Board, k: int) -> None:
    _, net, _, _ = rail(b.rng)
    b.card(f"{b.name('D')} {net} sk{k}_k {b.rng.choice(LEDS_FOR_RAIL[net])}")
    b.two_terminal("R", f"sk{k}_k", f"sk{k}_p", b.rng.choice(LED_RESISTORS))
    b.pin(f"sk{k}_p", 0.0, toggle=False)


def block_series(b: Board, k: int) -> None:
    b.two_terminal("R", "v3v3", f"se{k}_a", b.rng.choice(["22", "33", "47", "68"]))
    b.card(f"{b.name('D')} se{k}_a se{k}_m LED_IR")
    b.card(f"{b.name('D')} se{k}_m 0 LED_IR")


def block_parallel(b: Board, k: int) -> None:
    _, net, volts, _ = rail(b.rng)
    model = b.rng.choice(LEDS_FOR_RAIL[net])
    pin = f"pl{k}"
    b.pin(pin, volts, toggle=False)
    if b.rng.random() < 0.5:  # one resistor per LED
        for j in range(2):
            b.two_terminal("R", pin, f"pl{k}_{j}", b.rng.choice(LED_RESISTORS))
            b.card(f"{b.name('D')} pl{k}_{j} 0 {model}")
    else:  # two LEDs sharing one resistor
        b.two_terminal("R", pin, f"pl{k}_a", b.rng.choice(LED_RESISTORS))
        b.card(f"{b.name('D')} pl{k}_a 0 {model}")
        b.card(f"{b.name('D')} pl{k}_a 0 {model}")


# A board reuses a few standard pump cells (rail, pumping capacitor, LED, series resistor),
# as real designs reuse a validated cell; drc simulates each distinct cell once.
PUMP_CELLS = [(RAILS[0], "10u", "LED_WHT", "47"), (RAILS[2], "10u", "LED_WHT", "22"),
              (RAILS[2], "22u", "LED_GRN", "47"), (RAILS[0], "4.7u", "LED_GRN", "68")]


def block_pump(b: Board, k: int) -> None:
    """A doubler: charge diode from the rail, capacitor lifted by a toggling pin, transfer
    diode, then the LED and its resistor to ground."""
    (_, net, volts, _), cap, led, resistor = b.rng.choice(PUMP_CELLS)
    b.pin(f"pu{k}_pa", volts, toggle=True, period="0.5m")
    b.card(f"{b.name('D')} {net} pu{k}_x SCHOTTKY")
    b.two_terminal("C", f"pu{k}_pa", f"pu{k}_x", cap)
    b.card(f"{b.name('D')} pu{k}_x pu{k}_o SCHOTTKY")
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


def generate(n: int) -> tuple[str, int]:
    """The netlist text of about n elements, and its exact element count."""
    rng = random.Random(SEED)
    board = Board(rng)
    board.lines.append(f"Benchmark board of about {n} elements (drc bench/generate.py, seed {SEED})")
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
    if len(argv) != 3:
        print("usage: python bench/generate.py N OUT.cir", file=sys.stderr)
        return 2
    n = int(argv[1].replace("_", ""))
    out = Path(argv[2])
    out.parent.mkdir(parents=True, exist_ok=True)
    text, count = generate(n)
    out.write_text(text)
    out.with_suffix(".toml").write_text(config_text())
    print(f"{out}: {count} elements, {text.count(chr(10))} lines")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv))
