"""Demo: relativistic velocity bookkeeping for an invented deep-space relay.

Scenario (invented, numbers made up): the carrier *Corvid Station* cruises
at 0.6 c along +x past the beacon *Ostara*. It launches the relay probe
*Tern* at 0.7 c along +y, as measured aboard the carrier. Mission control at
the beacon wants
  1. the probe's velocity in the beacon frame (Einstein addition), its
     Lorentz factor and its kinetic energy per kilogram, and to confirm the
     result against the product of two 4x4 boost matrices;
  2. the Thomas-Wigner rotation of the probe's star-tracker axes (what the
     probe's gyro compass shows after the two boosts), and the fact that
     launching in the other order gives a rotated velocity;
  3. the Thomas precession of the probe's gyro while it loops around the
     beacon at 0.4 c on a circular track;
  4. the same bookkeeping at walking pace (a maintenance drone crawling on
     the carrier's hull), where textbook float64 formulas return zeros;
  5. a fleet-wide batch: 200 000 sensor pings composed at once, and the
     centre-of-momentum velocity of two equal-mass debris fragments through
     the Klein ball of the rest of the package.
Run: python examples/relativity_demo.py
"""

import numpy as np

import gyrokit.klein as klein
import gyrokit.relativity as rel

c = rel.SPEED_OF_LIGHT
carrier = np.array([0.6 * c, 0.0, 0.0])         # Corvid Station, beacon frame
launch = np.array([0.0, 0.7 * c, 0.0])          # Tern, carrier frame

# --- 1. the probe in the beacon frame ----------------------------------------
probe = rel.compose(carrier, launch)
gamma = rel.lorentz_factor(probe)
print(f"1. Tern in the beacon frame: v/c = {np.round(probe / c, 6)}, |v|/c = "
      f"{np.linalg.norm(probe) / c:.6f}, gamma = {gamma:.6f}, "
      f"kinetic energy {rel.gamma_minus_one(probe) * c**2:.4e} J/kg")
product = rel.boost(carrier) @ rel.boost(launch)
from_matrices = c * product[1:, 0] / product[0, 0]
print(f"   boost-matrix route agrees to {np.linalg.norm(from_matrices - probe) / c:.1e} c")

# --- 2. the rotation hidden in the composition --------------------------------
angle = rel.wigner_angle(carrier, launch)
axis = rel.wigner_axis(carrier, launch)
rot = rel.thomas_rotation(carrier, launch)
other_order = rel.compose(launch, carrier)
print(f"2. star-tracker rotation: {np.degrees(angle):.4f} deg about {np.round(axis, 6)}; "
      f"launch order reversed gives v/c = {np.round(other_order / c, 6)}, "
      f"and rotating it by gyr gives back Tern's: "
      f"{np.linalg.norm(rot @ other_order - probe) / c:.1e} c off")
g_c, g_l = rel.lorentz_factor(carrier), rel.lorentz_factor(launch)
print(f"   perpendicular-boost check: arccos((g1 + g2)/(1 + g1 g2)) = "
      f"{np.degrees(np.arccos((g_c + g_l) / (1 + g_c * g_l))):.4f} deg")

# --- 3. Thomas precession on the loop around the beacon -----------------------
radius = 3.0e7                                   # m, invented track radius
speed = 0.4 * c
t = np.linspace(0.0, 2 * np.pi * radius / speed, 9)[:-1]   # 8 points around the loop
phase = speed * t / radius
v_loop = speed * np.c_[-np.sin(phase), np.cos(phase), np.zeros_like(phase)]
a_loop = -(speed**2 / radius) * np.c_[np.cos(phase), np.sin(phase), np.zeros_like(phase)]
omega = rel.thomas_precession(v_loop, a_loop)
orbit_rate = speed / radius
print(f"3. Thomas precession on the loop: omega_z = {omega[0, 2]:+.6f} rad/s "
      f"(orbital rate {orbit_rate:+.6f} rad/s, ratio {omega[0, 2] / orbit_rate:+.6f}; "
      f"expected 1 - gamma = {1 - rel.lorentz_factor(v_loop[0]):+.6f}); "
      f"spread over {len(t)} points of the loop: {np.ptp(omega[:, 2]):.1e} rad/s")

# --- 4. walking pace -----------------------------------------------------------
hull = np.array([80.0, 0.0, 0.0])                # m/s, a slow tender alongside
crawl = np.array([0.0, 1.2, 0.0])                # m/s, the drone on its hull
naive_gamma_m1 = 1 / np.sqrt(1 - (crawl @ crawl) / c**2) - 1
print(f"4. drone at 1.2 m/s: gamma - 1 = {rel.gamma_minus_one(crawl):.4e} "
      f"(textbook float64: {naive_gamma_m1:.1e}); Wigner angle "
      f"{rel.wigner_angle(hull, crawl):.4e} rad vs |u x v|/(2c^2) = "
      f"{np.linalg.norm(np.cross(hull, crawl)) / (2 * c**2):.4e}")

# --- 5. fleet batch and debris centre of momentum ------------------------------
rng = np.random.default_rng(7)
n = 200_000
dirs = rng.normal(size=(n, 3))
dirs /= np.linalg.norm(dirs, axis=1, keepdims=True)
pings = dirs * rng.uniform(0, 0.999, n)[:, None] * c      # velocities relative to Tern
in_beacon = rel.compose(probe, pings)                       # (n, 3) with (3,)
angles = rel.wigner_angle(probe, pings)
print(f"5. {n} pings composed; fastest 1 - |v|/c = "
      f"{1 - np.linalg.norm(in_beacon, axis=1).max() / c:.2e}, all below c: "
      f"{bool(np.all(rel.lorentz_factor(in_beacon) >= 1))}; Wigner angles up to "
      f"{np.degrees(angles.max()):.2f} deg")
frag = np.array([[0.5 * c, 0.3 * c, 0.0], [-0.2 * c, 0.1 * c, 0.8 * c]])
mid = rel.from_klein(klein.midpoint(*rel.to_klein(frag)))
g = rel.lorentz_factor(frag)[:, None]
momentum_route = (g * frag).sum(0) / g.sum()
print(f"   debris centre of momentum: v/c = {np.round(mid / c, 6)} "
      f"(momentum/energy route differs by {np.linalg.norm(mid - momentum_route) / c:.1e} c); "
      f"rapidity between fragments = "
      f"{klein.distance(*rel.to_klein(frag)):.6f}")
