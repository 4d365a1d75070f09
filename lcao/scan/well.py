"""The well at a higher level than the curve: ``--level B3LYP/cc-pVTZ --well-level "CCSD(T)/CBS(cc-pVTZ,cc-pVQZ)"``.

An expensive level is rarely needed over a whole curve. The curve at the cheaper level gives the shape
(the Morse model, the vibrational levels) and the place of the minimum; the well level computes nine
points 0.01 A apart about it, with the protocol of that level (its own sweeps and separated atoms), and
its local fit gives r_e, omega_e, omega_e x_e, B_e, alpha_e and, with its atoms, D_e. Where the well
level's minimum falls outside the nine points, or off their middle five, the window is centred on it again
(at most :data:`MAX_MOVES` times): a quartic over a window that holds the minimum near its edge gave
r_e uncertainties of 0.0007 A where a centred one gives 0.0001 A (CCSD(T)/cc-pVDZ N2).
"""

from __future__ import annotations

from ..errors import FitError
from ..methods import method_for
from ..methods.base import Target
from ..units import angstrom_to_bohr
from .grid import Grid
from . import plan as planning
from .plan import REFINE_HALF, REFINE_STEP_ANGSTROM
from .session import Tally

MAX_MOVES = 2


async def well_scan(session, species, level, multiplicity: int, r_centre: float, tally: Tally):
    """The well level's scan over nine points about ``r_centre`` (bohr), moved until its minimum lies
    inside. Returns (ScanResult, its trusted points)."""
    from ..fit.local import local_fit
    from . import protocol

    method = method_for(level)
    target = Target(species.atoms, species.charge, multiplicity, level)
    step = float(angstrom_to_bohr(REFINE_STEP_ANGSTROM))
    centre = r_centre
    for move in range(MAX_MOVES + 1):
        grid = Grid(tuple(centre + k * step for k in range(-REFINE_HALF, REFINE_HALF + 1)), "well level")
        done, _, _ = await protocol.scan(session, method, species, target, grid.r_bohr, tally, refine_points=False,
                                         analyse=False, spatial=False, fitted=True)
        good = [p for p in done.result.points if p.trusted]
        if len(good) < 5:
            return done.result, good
        try:
            re_ = local_fit([p.r_bohr for p in good], [p.energy_hartree for p in good]).re
        except FitError:  # the minimum lies outside: where a parabola through the lowest points puts it
            re_ = planning.next_centre(good, step)
        if abs(re_ - centre) <= 2 * step or move == MAX_MOVES:
            return done.result, good
        centre = re_
    return done.result, good  # pragma: no cover - the loop returns
