"""Draw docs/shooting-diagram.png: the light, the wall, the camera and the target, seen from above.

Run:  python docs/shooting_diagram.py
"""

import os

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402

HERE = os.path.dirname(os.path.abspath(__file__))


def main(path=os.path.join(HERE, "shooting-diagram.png")):
    fig, ax = plt.subplots(figsize=(9, 6.2), dpi=120)
    d = 5.0
    # wall
    ax.fill_between([-3.6, 4.8], d, d + 0.18, color="#d0d0d0")
    ax.text(4.7, d + 0.3, "matte white wall", ha="right", fontsize=9)
    # beam cone (spill edge at 25 deg) and hotspot (4 deg)
    for half, colour, label in ((25, "#f5c542", "spill"), (4, "#e8590c", "hotspot")):
        x = d * np.tan(np.radians(half))
        ax.fill([0, -x, x], [0, d, d], color=colour, alpha=0.35 if half > 5 else 0.6, lw=0, label=label)
    # light on its tripod
    ax.add_patch(plt.Rectangle((-0.12, -0.25), 0.24, 0.25, color="#333333"))
    ax.text(0.0, -0.5, "light on a tripod,\naimed square to the wall", ha="center", va="top", fontsize=9)
    # distance D
    ax.annotate("", xy=(-0.5, d), xytext=(-0.5, 0), arrowprops=dict(arrowstyle="<->", lw=1.2))
    ax.text(-0.6, d / 2, "D: lens to wall\n(tape or laser, ±2 cm)", ha="right", va="center", fontsize=9)
    # target at the aim point
    ax.add_patch(plt.Rectangle((-0.105, d - 0.02), 0.21, 0.02, color="black"))
    ax.annotate("printed target at the aim point\n(geometry photo, room lights on;\nthen remove it)",
                xy=(0.1, d), xytext=(1.2, d - 1.1), fontsize=9, arrowprops=dict(arrowstyle="->", lw=0.8))
    # cameras: beside the light, or anywhere with the target
    ax.plot([0.25], [0.0], marker="s", ms=9, color="#1f4e79")
    ax.text(0.4, 0.05, "camera beside the light\n(square to the wall)", fontsize=9, va="bottom")
    cx, cy = 2.6, 1.4
    ax.plot([cx], [cy], marker="s", ms=9, color="#2e7d32")
    ang = np.arctan2(d - cy, -0.4 - cx)
    for da in (-0.45, 0.45):
        ax.plot([cx, cx + 2.2 * np.cos(ang + da)], [cy, cy + 2.2 * np.sin(ang + da)], color="#2e7d32", lw=0.8, ls="--")
    ax.text(cx + 0.15, cy - 0.1, "or anywhere, with the target\nin the same tripod position", fontsize=9, va="top")
    # safety box
    ax.text(-3.5, -1.35, "Never look into the beam or aim it at people, vehicles or aircraft.\n"
            "Powerful lights heat up: keep paper, fabric and the target away from the lens.\n"
            "Follow local rules and the light maker's instructions.",
            fontsize=8.5, va="top", bbox=dict(boxstyle="round", fc="#fff3cd", ec="#c9a227"))
    ax.set_xlim(-3.7, 4.9)
    ax.set_ylim(-2.4, d + 0.6)
    ax.set_aspect("equal")
    ax.set_xlabel("metres (seen from above)")
    ax.set_yticks([])
    ax.legend(loc="center left", fontsize=8)
    ax.set_title("Shooting a beam for beamshot", fontsize=11)
    fig.tight_layout()
    fig.savefig(path)
    plt.close(fig)
    return path


if __name__ == "__main__":
    print(main())
