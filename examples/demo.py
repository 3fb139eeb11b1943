"""Demo: re-centring a seed-bank taxonomy map with gyrovector algebra.

Scenario (invented): the Larkspur Seed Bank keeps 40 000 accessions, embedded
in the Poincaré disk by a hierarchy-embedding job: broad plant families near
the centre, individual accessions near the rim. A curator wants to
  1. re-centre the map on one family (a Möbius translation), checking that
     hyperbolic distances do not change;
  2. place a "bridge" label halfway between two families (gyromidpoint);
  3. pull a whole branch halfway back toward the centre (scalar
     multiplication);
  4. see the rotation (gyration) that two successive re-centrings leave
     behind, and confirm that Einstein midpoints in the Klein disk agree with
     the Möbius ones.
Run: make demo
"""

import numpy as np

import gyrokit as gk

rng = np.random.default_rng(2024)

# --- the invented map: 8 families, 5 000 accessions each ------------------
n_fam, per_fam = 8, 5_000
angles = np.linspace(0, 2 * np.pi, n_fam, endpoint=False)
families = 0.45 * np.c_[np.cos(angles), np.sin(angles)]           # near the centre
# accessions: family direction jittered, hyperbolic radius 4..9 (near the rim)
theta = np.repeat(angles, per_fam) + rng.normal(0, 0.12, n_fam * per_fam)
rho = rng.uniform(4.0, 9.0, n_fam * per_fam)                       # hyperbolic radius
accessions = np.tanh(rho / 2)[:, None] * np.c_[np.cos(theta), np.sin(theta)]
print(f"map: {len(families)} families, {len(accessions)} accessions; "
      f"closest accession to the rim: 1 - |x| = {1 - np.linalg.norm(accessions, axis=1).max():.2e}")


hyperbolic_distance = gk.poincare.distance  # exact near the rim, unlike arctanh(|x|)
origin = np.zeros(2)


# --- 1. re-centre on family 3 ----------------------------------------------
centre = families[3]
moved = gk.poincare.add(-centre, accessions)          # (-c) ⊕ x, one call for all rows
moved_fams = gk.poincare.add(-centre, families)
i, j = rng.integers(0, len(accessions), 2)
before = hyperbolic_distance(accessions[i], accessions[j])
after = hyperbolic_distance(moved[i], moved[j])
print(f"1. re-centred on family 3: it now sits at {np.round(moved_fams[3], 15)}; "
      f"distance between accessions {i} and {j}: {before:.12f} before, {after:.12f} after")

# --- 2. a bridge label between families 0 and 2 ------------------------------
bridge = gk.poincare.midpoint(families[0], families[2])
d0 = hyperbolic_distance(bridge, families[0])
d4 = hyperbolic_distance(bridge, families[2])
print(f"2. bridge label at {bridge}, distances to the two families {d0:.15f} and {d4:.15f}")

# --- 3. pull branch 5 halfway back toward the centre ------------------------
branch = accessions[5 * per_fam:6 * per_fam]
pulled = gk.poincare.scale(0.5, branch)
r_before = hyperbolic_distance(origin, branch)
r_after = hyperbolic_distance(origin, pulled)
print(f"3. branch 5 pulled in: hyperbolic radius ratio after/before = "
      f"{np.min(r_after / r_before):.15f} .. {np.max(r_after / r_before):.15f}")

# --- 4. the rotation left by two translations, and the Klein view ------------
a, b = families[1], families[6]
w = np.array([1.0, 0.0])
rot = gk.poincare.gyration(a, b, w)
angle = np.degrees(np.arctan2(rot[1], rot[0]))
two_steps = gk.poincare.add(a, gk.poincare.add(b, accessions[:3]))
one_step = gk.poincare.add(gk.poincare.add(a, b), gk.poincare.gyration(a, b, accessions[:3]))
print(f"4. translating by b then a = translating by a ⊕ b after a rotation of {angle:.6f} degrees "
      f"(max mismatch {np.abs(two_steps - one_step).max():.1e})")


fams_k = gk.convert(families, "poincare", "klein")    # the same points in the Klein disk
km = gk.klein.midpoint(fams_k[0], fams_k[2])
bridge_k = gk.convert(bridge, "poincare", "klein")
print(f"   Einstein midpoint in the Klein disk {km} = Klein image of the bridge {bridge_k} "
      f"(apart by {gk.klein.distance(km, bridge_k):.1e})")
