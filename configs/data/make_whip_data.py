"""Generate the INVENTED 'measured' impedance of the demo telemetry whip (configs/data/).

Not a measurement of anything: a smooth series-resonator model with a little ripple, so the demo
has the look of VNA data.  Rerun to regenerate: python configs/data/make_whip_data.py
"""

from pathlib import Path

import numpy as np
import skrf

f = np.linspace(380e6, 500e6, 241)
f0 = 462e6                      # invented series resonance
r = 21.0 * (f / f0) ** 2 + 3.0  # radiation + loss resistance, Ω (invented)
q = 7.5
x = q * 21.0 * (f / f0 - f0 / f)
rng = np.random.default_rng(20261201)
ripple = 0.6 * np.sin(2 * np.pi * f / 37e6) + rng.normal(0, 0.15, f.size)  # cable/mount ripple
z = r + ripple + 1j * (x + 0.8 * np.cos(2 * np.pi * f / 41e6))
gamma = (z - 50) / (z + 50)
net = skrf.Network(frequency=skrf.Frequency.from_f(f, unit="Hz"), s=gamma.reshape(-1, 1, 1), z0=50,
                   name="whip_uhf_invented")
out = Path(__file__).with_name("whip_uhf_invented.s1p")
net.write_touchstone(str(out.with_suffix("")), skrf_comment=False)
text = out.read_text()
header = ("! INVENTED DATA for the optmatch demo: not a measurement of any real antenna.\n"
          "! Scenario: a field team's UHF telemetry whip on a vehicle mount, 380-500 MHz.\n")
out.write_text(header + text)
print(out, f.size, "points")
