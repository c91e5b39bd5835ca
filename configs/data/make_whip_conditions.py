"""Generate INVENTED impedance data of the demo telemetry whip in three conditions (configs/data/).

Not measurements of anything.  The same kind of smooth series-resonator model as
make_whip_data.py, with invented changes for each condition:

- parked: the vehicle stands in the open (the resonance and resistance of the demo whip);
- moving: the whip leans back in the wind and the mount flexes, so the resonance rises a little
  and the radiation resistance drops a little;
- building: parked beside a wall, which pulls the resonance down and adds a slow ripple (the
  wall's reflection comes back with a delay).

Rerun to regenerate: python configs/data/make_whip_conditions.py
"""

from pathlib import Path

import numpy as np
import skrf

F = np.linspace(380e6, 500e6, 241)

CONDITIONS = {  # invented: resonance (Hz), radiation resistance at resonance (Ω), loss (Ω), Q, wall ripple
    "parked": dict(f0=462e6, r_rad=21.0, r_loss=3.0, q=7.5, wall=0.0, seed=11),
    "moving": dict(f0=468e6, r_rad=19.5, r_loss=3.2, q=7.8, wall=0.0, seed=12),
    "building": dict(f0=455e6, r_rad=22.5, r_loss=3.0, q=7.2, wall=2.5, seed=13),
}
STORY = {
    "parked": "vehicle parked in the open",
    "moving": "vehicle moving: the whip leans back and the mount flexes",
    "building": "vehicle parked beside a building wall",
}


def whip(f: np.ndarray, f0: float, r_rad: float, r_loss: float, q: float, wall: float, seed: int) -> np.ndarray:
    """Invented impedance (Ω) of the whip: a series resonator with ripple (mount, cable, wall)."""
    r = r_rad * (f / f0) ** 2 + r_loss
    x = q * r_rad * (f / f0 - f0 / f)
    rng = np.random.default_rng(seed)
    ripple = 0.6 * np.sin(2 * np.pi * f / 37e6) + rng.normal(0, 0.15, f.size)
    echo = wall * np.exp(2j * np.pi * f / 23e6)  # the wall's reflection, returning with a delay
    return r + ripple + echo.real + 1j * (x + 0.8 * np.cos(2 * np.pi * f / 41e6) + echo.imag)


def main() -> None:
    for name, params in CONDITIONS.items():
        z = whip(F, **params)
        gamma = (z - 50) / (z + 50)
        net = skrf.Network(frequency=skrf.Frequency.from_f(F, unit="Hz"), s=gamma.reshape(-1, 1, 1), z0=50,
                           name=f"whip_{name}_invented")
        out = Path(__file__).with_name(f"whip_{name}_invented.s1p")
        net.write_touchstone(str(out.with_suffix("")), skrf_comment=False)
        text = out.read_text()
        header = ("! INVENTED DATA for the optmatch demo: not a measurement of any real antenna.\n"
                  f"! Scenario: a field team's UHF telemetry whip on a vehicle mount, 380-500 MHz; {STORY[name]}.\n")
        out.write_text(header + text)
        print(out, F.size, "points")


if __name__ == "__main__":
    main()
