"""Draw docs/turned-flat-diagram.png: a flat field from two beam photos, the camera turned between them.

Left: the room seen from above - the light on its tripod, the camera on its tripod behind it, its
view in the first pose (square to the wall) and in the second (turned on the tripod head about
the same point).  Right: the two photos - the same wall point lands at different places in the
frame, so the lens shading there differs while the wall's brightness does not.

Run:  python docs/turned_flat_diagram.py
"""

import os

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
from matplotlib.patches import Rectangle  # noqa: E402

HERE = os.path.dirname(os.path.abspath(__file__))
POSE1, POSE2 = "#1f4e79", "#c0392b"


D_LIGHT, D_CAM = 3.0, 5.0  # light and camera to the wall (m)
CAM_X = 0.25  # the camera stands a little to the side of the light (m)
HALF_VIEW = 35.8  # half the horizontal view of a 24 mm-equivalent lens, 4:3 (deg)
TURN = 20.0  # the turn between the photos (deg)
STAR_X = CAM_X + D_CAM * np.tan(np.radians(-10.0))  # a wall point 10 deg left of the first view's centre


def _view(ax, heading_deg, colour, ls):
    """A camera's horizontal field of view: two lines from its centre to the wall."""
    for s in (-1, 1):
        a = np.radians(heading_deg + s * HALF_VIEW)
        ax.plot([CAM_X, CAM_X + D_CAM * np.tan(a)], [0.0, D_CAM], color=colour, lw=1.2, ls=ls)


def _room(ax):
    wall_y = D_CAM
    ax.fill_between([-4.4, 4.4], wall_y, wall_y + 0.15, color="#d0d0d0")
    ax.text(4.3, wall_y + 0.25, "matte white wall", ha="right", fontsize=9)
    light = (0.0, wall_y - D_LIGHT)
    # the beam: spill to the cut-off and the hotspot
    for half, colour, alpha, label in ((40, "#f5c542", 0.30, "spill"), (12, "#e8590c", 0.55, "hotspot")):
        x = D_LIGHT * np.tan(np.radians(half))
        ax.fill([light[0], light[0] - x, light[0] + x], [light[1], wall_y, wall_y], color=colour, alpha=alpha,
                lw=0, label=label)
    ax.add_patch(Rectangle((light[0] - 0.1, light[1] - 0.22), 0.2, 0.22, color="#333333"))
    ax.text(light[0] + 0.2, light[1] - 0.12, "light on its tripod:\nstays put, stays on", fontsize=8.5, va="center")
    # the camera: one tripod position, two poses about the same point
    _view(ax, 0.0, POSE1, "-")
    _view(ax, TURN, POSE2, "--")
    ax.add_patch(Rectangle((CAM_X - 0.14, -0.1), 0.28, 0.2, color="#222222"))
    t = np.radians(np.linspace(0.0, TURN, 30))
    rad = 1.05
    ax.plot(CAM_X + rad * np.sin(t), rad * np.cos(t), color=POSE2, lw=1.5)
    ax.annotate("", xy=(CAM_X + rad * np.sin(t[-1]), rad * np.cos(t[-1])),
                xytext=(CAM_X + rad * np.sin(t[-3]), rad * np.cos(t[-3])),
                arrowprops=dict(arrowstyle="-|>", color=POSE2, lw=1.5))
    ax.text(CAM_X + 0.85, 0.45, "turn 15-25°\nabout the same point", color=POSE2, fontsize=8.5, va="center")
    ax.text(CAM_X + 0.25, -0.2, "camera on a tripod:\nturn only the head (pan,\nor pan and tilt); keep\nthe legs where they are",
            fontsize=8.5, va="top")
    ax.plot([], [], color=POSE1, lw=1.2, label="photo 1: square to the wall")
    ax.plot([], [], color=POSE2, lw=1.2, ls="--", label="photo 2: turned")
    # one wall point seen from both poses along the same line of sight
    ax.plot(STAR_X, wall_y, marker="*", ms=13, color="#2e7d32", zorder=5)
    ax.plot([CAM_X, STAR_X], [0.0, wall_y], color="#2e7d32", lw=1.0, ls=":")
    ax.annotate("a wall point: the same\nline of sight in both photos", xy=(STAR_X - 0.05, wall_y - 0.05),
                xytext=(-4.2, 3.6), fontsize=8.5, color="#2e7d32", zorder=6,
                bbox=dict(boxstyle="round,pad=0.15", fc="white", ec="none"),
                arrowprops=dict(arrowstyle="->", color="#2e7d32", lw=0.8))
    ax.set_xlim(-4.4, 4.4)
    ax.set_ylim(-1.3, wall_y + 0.55)
    ax.set_aspect("equal")
    ax.set_yticks([])
    ax.set_xlabel("metres (room seen from above)")
    ax.legend(loc="lower left", fontsize=7.5, framealpha=0.95)
    ax.set_title("One tripod position, two poses", fontsize=10)


def _project(x_wall, y_wall, pan_deg, f, w, h):
    """Pinhole image position (frame units, y up) of wall points for the camera panned by ``pan_deg``."""
    a = np.radians(pan_deg)
    dx, dz = np.asarray(x_wall) - CAM_X, D_CAM
    xc = dx * np.cos(a) - dz * np.sin(a)
    zc = dx * np.sin(a) + dz * np.cos(a)
    return w / 2 + f * xc / zc, h / 2 + f * np.asarray(y_wall) / zc


def _frames(ax):
    """The two photos (4:3 frames): the beam centred in photo 1, moved left in photo 2."""
    w, h = 1.2, 0.9
    f = (w / 2) / np.tan(np.radians(HALF_VIEW))
    yy, xx = np.mgrid[-1:1:90j, -1:1:120j]
    r2 = (xx**2 * (w / 2) ** 2 + yy**2 * (h / 2) ** 2) / ((w / 2) ** 2 + (h / 2) ** 2)
    shade = np.zeros(r2.shape + (4,))
    shade[..., 3] = 0.55 * (1.0 - 1.0 / (1.0 + 1.7 * r2))  # lens shading: darker toward the corners

    def frame(y0, colour, title, pan_deg, ls):
        phi = np.linspace(0, 2 * np.pi, 200)
        for half, fc, alpha in ((40, "#f5c542", 0.55), (12, "#e8590c", 0.75)):
            rad = D_LIGHT * np.tan(np.radians(half))
            u, v = _project(rad * np.cos(phi), rad * np.sin(phi), pan_deg, f, w, h)
            for patch in ax.fill(u, y0 + v, color=fc, alpha=alpha, lw=0):
                patch.set_clip_path(Rectangle((0, y0), w, h, transform=ax.transData))
        ax.imshow(shade, extent=(0, w, y0, y0 + h), zorder=3)
        u, v = _project(STAR_X, 0.1, pan_deg, f, w, h)
        ax.plot(u, y0 + v, marker="*", ms=12, color="#2e7d32", zorder=4)
        ax.plot(w / 2, y0 + h / 2, marker="+", ms=10, color=colour, zorder=4)
        ax.add_patch(Rectangle((0, y0), w, h, fill=False, ec=colour, lw=1.6, ls=ls, zorder=5))
        ax.text(0, y0 + h + 0.03, title, fontsize=9, color=colour, va="bottom")

    for y0, colour, title, pan, ls in ((1.2, POSE1, "photo 1: the beam near the centre", 0.0, "-"),
                                       (0.0, POSE2, "photo 2: the same beam, off-centre", TURN, "--")):
        frame(y0, colour, title, pan, ls)
    ax.text(1.3, 1.05, "star: the same wall point -\nnearer the centre in photo 1,\nnearer the edge in photo 2.\n"
            "The wall sends the same light\nboth times; the difference is\nthe lens shading.",
            fontsize=8, va="center")
    ax.text(0.0, -0.06, "+ frame centre;  grey: lens shading, darker toward the corners", fontsize=7.5, va="top")
    ax.set_xlim(-0.05, 2.35)
    ax.set_ylim(-0.25, 2.35)
    ax.set_aspect("equal")
    ax.axis("off")
    ax.set_title("What the two photos show", fontsize=10)


def main(path=os.path.join(HERE, "turned-flat-diagram.png")):
    fig = plt.figure(figsize=(11, 6.6), dpi=110)
    grid = fig.add_gridspec(2, 2, width_ratios=(1.25, 1.0), height_ratios=(1.0, 0.17))
    _room(fig.add_subplot(grid[0, 0]))
    _frames(fig.add_subplot(grid[0, 1]))
    note = fig.add_subplot(grid[1, :])
    note.axis("off")
    note.text(0.0, 0.95, "Never look into the beam or aim it at people, vehicles or aircraft.  Keep the light on "
              "its tripod, away from paper and fabric:\npowerful lights heat up and can scorch materials close to "
              "the lens.  Same exposure, focus and zoom for every photo; nothing clipped.",
              fontsize=8.5, va="top", bbox=dict(boxstyle="round", fc="#fff3cd", ec="#c9a227"))
    fig.suptitle("Flat field from the beam photos: turn the camera on its tripod between two photos", fontsize=11)
    fig.tight_layout()
    fig.savefig(path)
    plt.close(fig)
    return path


if __name__ == "__main__":
    print(main())
