"""Procedural renderer for the invented parts-on-a-conveyor demo scenario (DESIGN §8).

Each image is a top-down view of one small hardware part lying on a conveyor belt,
with belt texture, a lighting gradient, shading from a height field, clutter,
partial parts at the frame edge and an occasional guide rail that hides part of the
object. Every image comes with the exact binary mask of the main part's visible
pixels. Output is fully determined by (seed, label index).

Only numpy is used, so results do not depend on an image library's resampler.
Shapes are signed-distance fields in the part's own unit frame (about [-1, 1]);
heights are derived from those distances (bevels) and shaded with a Blinn-Phong
model (common practice, no source beyond the textbook model).
"""

import numpy as np

LABELS = ["hex-nut", "washer", "bearing", "spring", "bolt", "gear", "clip", "bracket"]
SIZE = 112          # output width and height in pixels
SS = 2              # supersampling factor: shapes are rasterised at SIZE*SS, then box-averaged
N = SIZE * SS

# Pixel-centre coordinates of the supersampled grid, in output-pixel units.
_coords = (np.arange(N, dtype=np.float64) + 0.5) / SS
GX, GY = np.meshgrid(_coords, _coords)  # GX: column (x), GY: row (y)

# Metal finishes shared by all classes so colour alone never gives the class away.
MATERIALS = {
    "steel": (0.60, 0.61, 0.63),
    "zinc": (0.72, 0.75, 0.80),
    "black-oxide": (0.16, 0.16, 0.18),
    "brass": (0.74, 0.58, 0.30),
    "yellow-zinc": (0.78, 0.70, 0.42),
}
MATERIAL_NAMES = list(MATERIALS)
MATERIAL_WEIGHTS = np.array([0.32, 0.26, 0.16, 0.13, 0.13])


# ---------------------------------------------------------------------------
# small numeric helpers

def smooth_noise(rng, cells, size=N):
    """Value noise: a random grid of cells x cells, bilinearly upsampled to size x size, in [-1, 1]."""
    grid = rng.uniform(-1.0, 1.0, (cells + 1, cells + 1))
    t = np.linspace(0.0, cells, size, endpoint=False) + cells / (2.0 * size)
    i = np.minimum(t.astype(int), cells - 1)
    f = t - i
    f = f * f * (3 - 2 * f)  # smoothstep keeps the grid from showing
    rows = grid[i] * (1 - f)[:, None] + grid[i + 1] * f[:, None]
    return rows[:, i] * (1 - f)[None, :] + rows[:, i + 1] * f[None, :]


def box_blur(a, r):
    """Separable box blur of radius r (in supersampled pixels), edges clamped."""
    if r < 1:
        return a
    k = 2 * r + 1
    p = np.pad(a, r, mode="edge")
    c = np.cumsum(p, axis=0)
    c = np.vstack([np.zeros((1, c.shape[1])), c])
    a = (c[k:] - c[:-k]) / k
    c = np.cumsum(a, axis=1)
    c = np.hstack([np.zeros((c.shape[0], 1)), c])
    return (c[:, k:] - c[:, :-k]) / k


def shift(a, dx, dy):
    """Shift an array by whole pixels, filling with zeros."""
    out = np.zeros_like(a)
    h, w = a.shape
    xs, xd = (0, dx) if dx >= 0 else (-dx, 0)
    ys, yd = (0, dy) if dy >= 0 else (-dy, 0)
    out[yd:h - ys if ys else h, xd:w - xs if xs else w] = a[ys:h - yd if yd else h, xs:w - xd if xd else w]
    return out


def downsample(a):
    """Average SS x SS blocks of the supersampled grid into one output pixel."""
    if a.ndim == 2:
        return a.reshape(SIZE, SS, SIZE, SS).mean(axis=(1, 3))
    return a.reshape(SIZE, SS, SIZE, SS, a.shape[2]).mean(axis=(1, 3))


# ---------------------------------------------------------------------------
# signed distance fields (negative inside), after the usual 2-D SDF formulas

def sd_circle(u, v, r):
    return np.hypot(u, v) - r


def sd_annulus(u, v, r_in, r_out):
    rho = np.hypot(u, v)
    return np.maximum(rho - r_out, r_in - rho)


def sd_box(u, v, hx, hy):
    qx, qy = np.abs(u) - hx, np.abs(v) - hy
    return np.hypot(np.maximum(qx, 0), np.maximum(qy, 0)) + np.minimum(np.maximum(qx, qy), 0)


def sd_hexagon(u, v, apothem):
    """Regular hexagon with the given inner radius; exact SDF by folding into one edge's wedge."""
    kx, ky, kz = -0.8660254037844387, 0.5, 0.5773502691896257
    px, py = np.abs(u), np.abs(v)
    d = 2 * np.minimum(kx * px + ky * py, 0)
    px, py = px - d * kx, py - d * ky
    px = px - np.clip(px, -kz * apothem, kz * apothem)
    py = py - apothem
    return np.hypot(px, py) * np.sign(py)


def sd_segment(u, v, ax, ay, bx, by, r):
    pax, pay = u - ax, v - ay
    bax, bay = bx - ax, by - ay
    h = np.clip((pax * bax + pay * bay) / (bax * bax + bay * bay), 0, 1)
    return np.hypot(pax - h * bax, pay - h * bay) - r


def bevel(d, width):
    """Height 0 at the outline rising to 1 one bevel width inside, rounded like a deburred edge."""
    t = np.clip(-d / width, 0, 1)
    return np.sin(t * np.pi / 2)


# ---------------------------------------------------------------------------
# parts: each returns (inside bool, height in part units, albedo factor map, brushing axis map)
# in the part's own frame (u, v). `rng` draws the part's own variation.

def part_hex_nut(u, v, rng):
    a = 0.86
    hole = rng.uniform(0.36, 0.5)
    d_hex = sd_hexagon(u, v, a)
    rho = np.hypot(u, v)
    d = np.maximum(d_hex, hole - rho)
    inside = d < 0
    # The top face of a nut is chamfered by a cone: the corners show curved edges.
    chamfer = np.clip((a * rng.uniform(1.02, 1.1) - rho) / 0.12, 0, 1)
    h = 0.18 * np.minimum(bevel(d_hex, 0.05), 0.35 + 0.65 * chamfer)
    # Thread seen inside the bore: a bright-dark ring just outside the hole.
    ring = np.clip((rho - hole) / 0.1, 0, 1)
    h = np.minimum(h, 0.18 * (0.3 + 0.7 * ring))
    albedo = 1.0 - 0.35 * (1 - ring) * inside
    return inside, h * inside, albedo, np.arctan2(v, u) + np.pi / 2


def part_washer(u, v, rng):
    r_in = rng.uniform(0.36, 0.56)
    d = sd_annulus(u, v, r_in, 1.0)
    if rng.random() < 0.18:  # split lock washer: a narrow cut through the ring
        ang = np.arctan2(v, u)
        d = np.maximum(d, -(np.abs(ang) * np.hypot(u, v) - rng.uniform(0.03, 0.06)))
    inside = d < 0
    h = 0.08 * bevel(d, rng.uniform(0.04, 0.09))
    return inside, h, np.ones_like(u), np.arctan2(v, u) + np.pi / 2


def part_bearing(u, v, rng):
    rho = np.hypot(u, v)
    bore = rng.uniform(0.28, 0.42)
    inner_out = bore + rng.uniform(0.14, 0.2)
    outer_in = rng.uniform(0.76, 0.84)
    d_all = sd_annulus(u, v, bore, 1.0)
    inside = d_all < 0
    h_outer = 0.3 * bevel(sd_annulus(u, v, outer_in, 1.0), 0.05)
    h_inner = 0.3 * bevel(sd_annulus(u, v, bore, inner_out), 0.04)
    albedo = np.ones_like(u)
    race = (rho >= inner_out) & (rho <= outer_in)
    mid, half = (inner_out + outer_in) / 2, (outer_in - inner_out) / 2
    if rng.random() < 0.5:
        # Open bearing: balls in a cage.
        n = rng.integers(7, 12)
        ball_r = half * rng.uniform(0.75, 0.92)
        ang = np.arctan2(v, u) + rng.uniform(0, 2 * np.pi)
        sector = 2 * np.pi / n
        a_loc = (np.mod(ang, sector) - sector / 2) * mid
        dist = np.hypot(a_loc, rho - mid)
        ball = np.sqrt(np.clip(1 - (dist / ball_r) ** 2, 0, 1))
        cage = 0.1 * race
        h_race = np.maximum(cage, 0.28 * ball * (dist < ball_r))
        albedo = np.where(race & (dist >= ball_r), rng.uniform(0.45, 0.8), albedo)
    else:
        # Shielded bearing: a flat shield, sometimes metal (washer-like), sometimes a coloured seal.
        groove = np.abs(rho - (inner_out + half * rng.uniform(0.2, 0.5))) < 0.015
        h_race = 0.2 * race * (1 - 0.5 * groove)
        albedo = np.where(race, rng.uniform(0.75, 1.0), albedo)
        albedo = np.where(groove, 0.55, albedo)
    h = np.maximum(np.maximum(h_outer, h_inner), h_race) * inside
    return inside, h, albedo, np.arctan2(v, u) + np.pi / 2


def part_spring(u, v, rng):
    """A helical compression spring lying along u; top arcs hide the bottom arcs behind them."""
    half_len = rng.uniform(0.8, 1.0)
    radius = rng.uniform(0.22, 0.36)
    wire = rng.uniform(0.055, 0.09)
    pitch = rng.uniform(wire * 1.15, wire * 3.2)
    hw = wire / 2
    vv = np.clip(v / radius, -1, 1)
    phi = np.arccos(vv)                     # 0..pi along the top half of each turn
    sin_phi = np.maximum(np.sin(phi), 1e-3)
    stretch = np.minimum(np.sqrt((pitch / (2 * np.pi)) ** 2 + (radius * sin_phi) ** 2) / (radius * sin_phi), 4.0)
    h = np.zeros_like(u)
    inside = np.zeros(u.shape, dtype=bool)
    for top, sign in ((False, -1.0), (True, 1.0)):
        ph = phi if top else 2 * np.pi - phi
        phase = np.mod(u - pitch * ph / (2 * np.pi), pitch)
        du = np.minimum(phase, pitch - phase) / stretch
        on = (du < hw) & (np.abs(v) < radius + hw) & (np.abs(u) < half_len)
        z = radius + sign * radius * np.sin(phi) + np.sqrt(np.clip(hw * hw - du * du, 0, None))
        z = np.where(np.abs(v) >= radius, radius * 0.2, z)
        take = on & (~inside | (z > h))
        h = np.where(take, z, h)
        inside |= on
    # Ground-flat end coils: a full ring across the spring at each end.
    for end in (-1, 1):
        cap = (np.abs(u - end * (half_len - hw)) < hw) & (np.abs(v) < radius + hw)
        z = radius + radius * np.sqrt(np.clip(1 - vv * vv, 0, 1))
        h = np.where(cap, np.maximum(h, z), h)
        inside |= cap
    return inside, h * inside, np.ones_like(u), np.zeros_like(u) + np.pi / 2


def part_bolt(u, v, rng):
    """A hex bolt lying on its side along u: hex head at -u, threaded shaft towards +u."""
    head_len = rng.uniform(0.22, 0.34)
    head_hw = rng.uniform(0.28, 0.4)
    shaft_r = rng.uniform(0.13, 0.22)
    pitch = rng.uniform(0.05, 0.1)
    thread_from = rng.uniform(-0.5, 0.3)
    x0 = -1.0 + head_len
    d_head = sd_box(u - (-1.0 + head_len / 2), v, head_len / 2, head_hw)
    d_shaft = sd_box(u - (x0 + 1.0) / 2, v, (1.0 - x0) / 2, shaft_r)
    # Chamfered tip: cut the two corners at 45 degrees.
    d_shaft = np.maximum(d_shaft, (u + np.abs(v) - (1.0 + shaft_r * 0.6)) / np.sqrt(2))
    inside = (d_head < 0) | (d_shaft < 0)
    # Shaft: a cylinder seen from above, threads as slanted ridges.
    cyl = np.sqrt(np.clip(1 - (v / shaft_r) ** 2, 0, 1)) * shaft_r
    lead = np.tan(np.radians(rng.uniform(3, 9)))
    ridge = 0.5 + 0.5 * np.cos(2 * np.pi * (u + v * lead) / pitch)
    threaded = u > thread_from
    h_shaft = cyl + 0.03 * ridge * threaded
    albedo = np.where(threaded & (d_shaft < 0), 1.0 - 0.3 * (1 - ridge), 1.0)
    # Head: a hex prism seen across its flats: three faces, the middle one flat.
    t = np.clip(np.abs(v) / head_hw, 0, 1)
    h_head = head_hw * np.where(t < 0.5, 1.0, 1.0 - (t - 0.5) * 1.2) * bevel(d_head, 0.04) + 0.02
    h = np.where(d_head < 0, h_head, np.where(d_shaft < 0, h_shaft, 0.0))
    return inside, h, albedo, np.zeros_like(u)


def part_gear(u, v, rng):
    teeth = int(rng.integers(10, 20))
    root = rng.uniform(0.76, 0.84)
    rho = np.hypot(u, v)
    ang = np.arctan2(v, u)
    f = np.cos(teeth * ang)
    r_edge = root + (1.0 - root) * np.clip((f + 0.15) * 1.6, 0, 1)
    hole = rng.uniform(0.14, 0.26)
    d = np.maximum(rho - r_edge, hole - rho)
    if rng.random() < 0.55:  # lightening holes in the web
        k = int(rng.integers(4, 7))
        rr = rng.uniform(0.1, 0.15)
        sector = 2 * np.pi / k
        a_loc = (np.mod(ang, sector) - sector / 2) * 0.52
        d = np.maximum(d, -(np.hypot(a_loc, rho - 0.52) - rr))
    inside = d < 0
    hub_r = hole + rng.uniform(0.1, 0.18)
    h = 0.14 * bevel(d, 0.04) + 0.06 * (rho < hub_r) * bevel(rho - hub_r, 0.03)
    return inside, h * inside, np.ones_like(u), ang + np.pi / 2


def part_clip(u, v, rng):
    """A retaining ring (circlip): an open ring with two lugs at the gap."""
    rc = rng.uniform(0.72, 0.82)
    hw = rng.uniform(0.06, 0.11)
    gap = np.radians(rng.uniform(35, 65))
    rho = np.hypot(u, v)
    ang = np.arctan2(v, u)
    # The ring is widest opposite the gap and tapers toward the lugs.
    width = hw * (0.7 + 0.3 * (1 - np.cos(ang)) / 2 * 2)
    d_ring = np.abs(rho - rc) - width
    d_ring = np.maximum(d_ring, (gap / 2 - np.abs(ang)) * rc)
    out = 1.0 if rng.random() < 0.5 else -1.0  # external or internal ring
    d = d_ring
    lug_r = rng.uniform(0.12, 0.17)
    hole_r = lug_r * rng.uniform(0.35, 0.5)
    for s in (-1, 1):
        a = s * (gap / 2 + lug_r / rc * 0.8)
        cx, cy = np.cos(a) * (rc + out * 0.06), np.sin(a) * (rc + out * 0.06)
        d_lug = sd_circle(u - cx, v - cy, lug_r)
        d = np.minimum(d, d_lug)
        d = np.maximum(d, -sd_circle(u - cx, v - cy, hole_r))
    inside = d < 0
    h = 0.06 * bevel(d, 0.04)
    return inside, h, np.ones_like(u), ang + np.pi / 2


def part_bracket(u, v, rng):
    """An angle bracket (L) or a flat strap, with mounting holes."""
    w = rng.uniform(0.2, 0.3)
    kind = rng.random()
    if kind < 0.65:
        la, lb = rng.uniform(0.8, 1.0), rng.uniform(0.55, 1.0)
        ox, oy = -0.5, -0.4
        d1 = sd_box(u - (ox + la / 2), v - oy, la / 2 + w, w)
        d2 = sd_box(u - ox, v - (oy + lb / 2), w, lb / 2 + w)
        d = np.minimum(d1, d2)
        holes = [(ox + la * 0.75, oy), (ox, oy + lb * 0.7)]
        # The upright leg is bent up: a ramp in height across the bend.
        bent = rng.random() < 0.5
        h_bend = np.where(bent & (v > oy + w), np.clip((v - (oy + w)) * 0.5, 0, 0.3), 0.0)
    else:
        la = rng.uniform(0.85, 1.0)
        d = sd_box(u, v, la, w)
        n = int(rng.integers(2, 5))
        holes = [(x, 0.0) for x in np.linspace(-la + w, la - w, n)]
        h_bend = np.zeros_like(u)
    hole_r = w * rng.uniform(0.35, 0.55)
    slot = rng.random() < 0.4
    for hx, hy in holes:
        if slot:
            dh = sd_segment(u, v, hx - hole_r * 0.8, hy, hx + hole_r * 0.8, hy, hole_r * 0.7)
        else:
            dh = sd_circle(u - hx, v - hy, hole_r)
        d = np.maximum(d, -dh)
    inside = d < 0
    h = 0.05 * bevel(d, 0.035) + h_bend
    return inside, h * inside, np.ones_like(u), np.zeros_like(u)


PARTS = [part_hex_nut, part_washer, part_bearing, part_spring, part_bolt, part_gear, part_clip, part_bracket]
# Typical size of each part in pixels per part unit (parts span about [-1, 1]).
SCALE_RANGE = {
    "hex-nut": (21, 34), "washer": (21, 34), "bearing": (22, 36), "spring": (30, 46),
    "bolt": (30, 46), "gear": (22, 35), "clip": (22, 35), "bracket": (28, 42),
}


# ---------------------------------------------------------------------------
# scene

def shade(height_px, albedo_rgb, light, spec_strength, shininess, ambient):
    """Blinn-Phong shading of a height field given in pixels (common practice, no source)."""
    gy, gx = np.gradient(height_px, 1.0 / SS)
    nz = 1.0 / np.sqrt(gx * gx + gy * gy + 1.0)
    nx, ny = -gx * nz, -gy * nz
    lx, ly, lz = light
    diffuse = np.clip(nx * lx + ny * ly + nz * lz, 0, 1)
    hx, hy, hz = lx, ly, lz + 1.0
    hn = np.sqrt(hx * hx + hy * hy + hz * hz)
    spec = np.clip((nx * hx + ny * hy + nz * hz) / hn, 0, 1) ** shininess
    # A tilted surface reflects the dark hall instead of the lamp: metals darken at edges.
    tilt = 1.0 - 0.35 * (1.0 - nz)
    col = albedo_rgb * (ambient + (1 - ambient) * diffuse)[..., None] * tilt[..., None]
    return col + (spec_strength * spec)[..., None] * (0.6 + 0.4 * albedo_rgb)


def render_part(rng, label_idx, cx, cy, scale, angle, light):
    """Rasterise and shade one part placed at (cx, cy) px. Returns (rgb, inside, height_px)."""
    ca, sa = np.cos(angle), np.sin(angle)
    dx, dy = GX - cx, GY - cy
    u = (ca * dx + sa * dy) / scale
    v = (-sa * dx + ca * dy) / scale
    inside, h, albedo_f, brush_axis = PARTS[label_idx](u, v, rng)
    mat = MATERIAL_NAMES[rng.choice(len(MATERIAL_NAMES), p=MATERIAL_WEIGHTS)]
    base = np.array(MATERIALS[mat]) * rng.uniform(0.88, 1.12) * rng.uniform(0.97, 1.03, 3)
    # Brushed finish: fine streaks along the machining direction.
    streak = smooth_noise(rng, 40) * 0.5 + smooth_noise(rng, 12) * 0.5
    brush = 1.0 + rng.uniform(0.04, 0.1) * streak * np.cos(brush_axis * 0 + angle)
    albedo = base[None, None, :] * (albedo_f * brush)[..., None]
    dark = mat == "black-oxide"
    rgb = shade(h * scale, albedo, light,
                spec_strength=rng.uniform(0.25, 0.45) if dark else rng.uniform(0.4, 0.8),
                shininess=rng.uniform(8, 30), ambient=rng.uniform(0.35, 0.55))
    return rgb, inside, h * scale


def belt_texture(rng):
    """Rubber or fabric belt: base colour, weave stripes along the travel direction, wear, dirt."""
    palette = [(0.22, 0.23, 0.24), (0.14, 0.15, 0.16), (0.16, 0.24, 0.18),
               (0.15, 0.19, 0.27), (0.32, 0.31, 0.28), (0.40, 0.40, 0.38)]
    base = np.array(palette[rng.integers(len(palette))]) * rng.uniform(0.85, 1.15, 3)
    travel = rng.choice([0.0, np.pi / 2]) + rng.normal(0, 0.04)
    along = GX * np.cos(travel) + GY * np.sin(travel)
    across = -GX * np.sin(travel) + GY * np.cos(travel)
    period = rng.uniform(1.5, 4.0)
    weave = np.sin(2 * np.pi * across / period) * rng.uniform(0.02, 0.08)
    weave += np.sin(2 * np.pi * along / (period * rng.uniform(1.5, 3))) * rng.uniform(0.0, 0.03)
    wear = smooth_noise(rng, 6) * rng.uniform(0.04, 0.12) + smooth_noise(rng, 24) * 0.04
    grain = rng.normal(0, rng.uniform(0.02, 0.05), (N, N))
    lum = 1.0 + weave + wear + grain
    return base[None, None, :] * lum[..., None], travel


def add_specks(rng, img, count):
    """Dirt spots and bright metal shavings on the belt."""
    for _ in range(count):
        x, y = rng.uniform(0, SIZE, 2)
        if rng.random() < 0.6:
            r = rng.uniform(0.4, 1.6)
            m = np.hypot(GX - x, GY - y) < r
            img[m] *= rng.uniform(0.4, 0.8)
        else:
            a = rng.uniform(0, np.pi)
            ln = rng.uniform(1.5, 5)
            m = sd_segment(GX, GY, x, y, x + ln * np.cos(a), y + ln * np.sin(a), rng.uniform(0.25, 0.6)) < 0
            img[m] = img[m] * 0.3 + rng.uniform(0.45, 0.8)
    return img


def guide_rail(rng, travel):
    """A belt-side guide rail entering from one edge parallel to the travel direction."""
    width = rng.uniform(7, 18)
    side = rng.integers(2)
    if abs(np.cos(travel)) > 0.5:   # belt runs left-right: rails at top or bottom
        pos = GY if side == 0 else SIZE - GY
    else:
        pos = GX if side == 0 else SIZE - GX
    tilt = (GX + GY - SIZE) * rng.normal(0, 0.02)
    inside = pos + tilt < width
    depth = np.clip((pos + tilt) / width, 0, 1)
    col = np.array([0.55, 0.56, 0.58]) * rng.uniform(0.7, 1.15)
    prof = 0.75 + 0.35 * np.cos(depth * np.pi * 1.5) + 0.08 * smooth_noise(rng, 30)
    rgb = col[None, None, :] * prof[..., None]
    return rgb, inside


def render_sample(seed, label_idx, max_tries=12):
    """Render one image of class `label_idx`. Returns (rgb uint8 [112,112,3], mask bool [112,112])."""
    rng = np.random.default_rng(seed)
    for _ in range(max_tries):
        out = _try_render(rng, label_idx)
        if out is not None:
            return out
    raise RuntimeError(f"could not place a visible part for seed {seed}")


def _try_render(rng, label_idx):
    label = LABELS[label_idx]
    img, travel = belt_texture(rng)
    az, el = rng.uniform(0, 2 * np.pi), np.radians(rng.uniform(35, 70))
    light = (np.cos(az) * np.cos(el), np.sin(az) * np.cos(el), np.sin(el))
    img = add_specks(rng, img, int(rng.integers(4, 30)))

    lo, hi = SCALE_RANGE[label]
    scale = rng.uniform(lo, hi)
    margin = rng.uniform(2, 22)
    cx = rng.uniform(SIZE / 2 - margin, SIZE / 2 + margin)
    cy = rng.uniform(SIZE / 2 - margin, SIZE / 2 + margin)
    angle = rng.uniform(0, 2 * np.pi)

    layers = []  # (rgb, inside, is_main) in drawing order
    main_rgb, main_in, main_h = render_part(rng, label_idx, cx, cy, scale, angle, light)
    full_area = main_in.sum()
    main_layer = (main_rgb, main_in, main_h, True)

    # A partial part of another class at the frame edge, in front of or behind the main part.
    others = []
    if rng.random() < 0.35:
        other = int(rng.choice([i for i in range(len(LABELS)) if i != label_idx]))
        olo, ohi = SCALE_RANGE[LABELS[other]]
        edge_ang = rng.uniform(0, 2 * np.pi)
        dist = rng.uniform(62, 85)
        ox, oy = SIZE / 2 + dist * np.cos(edge_ang), SIZE / 2 + dist * np.sin(edge_ang)
        o_rgb, o_in, o_h = render_part(rng, other, ox, oy, rng.uniform(olo, ohi) * 0.8, rng.uniform(0, 2 * np.pi), light)
        others.append((o_rgb, o_in, o_h, False))
    if others and rng.random() < 0.5:
        layers = [main_layer] + others
    else:
        layers = others + [main_layer]

    # Drop shadows fall away from the light; each is cast onto whatever lies below.
    sdx = int(round(-light[0] / max(light[2], 0.3) * 2.5 * SS))
    sdy = int(round(-light[1] / max(light[2], 0.3) * 2.5 * SS))
    visible_main = np.zeros((N, N), dtype=bool)
    for rgb, inside, _h, is_main in layers:
        shadow = box_blur(shift(inside.astype(np.float64), sdx, sdy), 2 * SS)
        img *= (1 - rng.uniform(0.35, 0.6) * shadow)[..., None]
        img = np.where(inside[..., None], rgb, img)
        visible_main = inside if is_main else (visible_main & ~inside)

    if rng.random() < 0.3:
        r_rgb, r_in = guide_rail(rng, travel)
        shadow = box_blur(shift(r_in.astype(np.float64), sdx, sdy), 3 * SS)
        img *= (1 - 0.5 * shadow)[..., None]
        img = np.where(r_in[..., None], r_rgb, img)
        visible_main &= ~r_in

    img = add_specks(rng, img, int(rng.integers(0, 4)))  # a few specks land on top of the part

    # Visible pixels of the main part inside the frame; the frame clips whatever lies outside.
    frac = visible_main.sum() / max(full_area, 1)
    if frac < 0.6 or full_area < 200 * SS * SS:
        return None

    # Lighting: a linear gradient across the frame, vignetting and a colour cast.
    g_ang = rng.uniform(0, 2 * np.pi)
    grad = 1.0 + rng.uniform(0.05, 0.3) * ((GX - SIZE / 2) * np.cos(g_ang) + (GY - SIZE / 2) * np.sin(g_ang)) / (SIZE / 2)
    vign = 1.0 - rng.uniform(0.05, 0.25) * (((GX - SIZE / 2) ** 2 + (GY - SIZE / 2) ** 2) / (SIZE / 2) ** 2)
    cast = rng.uniform(0.95, 1.05, 3)
    img = img * (grad * vign * rng.uniform(0.9, 1.3))[..., None] * cast[None, None, :]

    out = downsample(img)
    out = out + rng.normal(0, rng.uniform(0.003, 0.015), out.shape)  # sensor noise
    rgb = np.clip(np.round(out * 255), 0, 255).astype(np.uint8)
    mask = downsample(visible_main.astype(np.float64)) >= 0.5
    return rgb, mask


def sample_seed(base_seed, split, index):
    """Seed of one image: independent streams per split and index."""
    return [int(base_seed), {"train": 1, "test": 2, "demo": 3, "eval": 4}[split], int(index)]
