"""Magnetic and grid bearings to true north.

``true = magnetic + D`` with D the declination (east positive; World Magnetic Model
2025 unless given), and ``true = grid + gamma`` with gamma the meridian convergence
of the row's own UTM zone, of ``grid_crs``, or of the standard UTM zone of the
position (with a warning). Signs: US Army FM 21-26, ch. 6 declination diagram;
convergence pinned against geographiclib in the tests.
"""

from __future__ import annotations

import numpy as np

from dfkit import grids, magnetic
from dfkit.observations.rowlog import RowLog


def magnetic_declination(log: RowLog, need, times, time_cells, lat, lon, notes):
    """Model declination [° east] and its 1-sigma uncertainty [°] for the rows in ``need``
    (magnetic rows without a declination); rows outside the model's life are refused."""
    n = len(need)
    dec = np.zeros(n)
    dec_sd = np.zeros(n)
    need = need & ~log.bad
    log.reject(need & ~np.isfinite(times), "time",
               f"a magnetic bearing needs a time (for {magnetic.MODEL_NAME}), a declination column, or the "
               "declination option (--declination)")
    need &= ~log.bad
    if not need.any():
        return dec, dec_sd
    dy = magnetic.decimal_year(np.where(need, times, 1.7e9))
    outside = need & ~magnetic.in_model_life(dy)
    log.reject(outside, "time", lambda idx: [
        f"{time_cells[i]} is outside the life of {magnetic.MODEL_NAME} ({magnetic.MODEL_START:.0f}-"
        f"{magnetic.MODEL_END:.0f}); give the declination for this date in a declination column" for i in idx])
    need &= ~log.bad
    if not need.any():
        return dec, dec_sd
    res = magnetic.declination(lat[need], lon[need], dy[need])
    dec[need] = res.declination_deg
    dec_sd[need] = res.sigma_deg
    hnt = np.full(n, np.inf)
    hnt[need] = res.h_nt
    log.warn(hnt < magnetic.BLACKOUT_H_NT, "north", "the magnetic field here is too weak for a compass (WMM "
                                                    "blackout zone); this bearing is probably unreliable")
    log.warn((hnt >= magnetic.BLACKOUT_H_NT) & (hnt < magnetic.CAUTION_H_NT), "north",
             "weak horizontal magnetic field (WMM caution zone); compass bearings are less reliable")
    notes.append(f"declination from {magnetic.MODEL_NAME} for {int(need.sum())} magnetic bearings")
    return dec, dec_sd


def grid_convergence(log: RowLog, grid_rows, zone, south, lat, lon, grid_crs):
    """Convergence [°] for grid bearings: the row's own UTM zone, else ``grid_crs``, else the
    standard UTM zone of the position (said in a warning)."""
    import pyproj

    conv = np.zeros(len(grid_rows))
    grid_rows = grid_rows & ~log.bad
    if not grid_rows.any():
        return conv
    own = grid_rows & (zone > 0)
    named = grid_rows & ~own & (grid_crs is not None)
    guess = grid_rows & ~own & (grid_crs is None)
    if own.any():
        conv[own] = grids.utm_convergence_deg(zone[own], south[own], lat[own], lon[own])
    if named.any():
        conv[named] = grids.convergence_deg(pyproj.CRS.from_user_input(grid_crs), lat[named], lon[named])
    if guess.any():
        z, s = grids.standard_utm_zone(lat[guess], lon[guess])
        conv[guess] = grids.utm_convergence_deg(z, s, lat[guess], lon[guess])
        zz = np.zeros(len(conv), int)
        ss = np.zeros(len(conv), bool)
        zz[guess], ss[guess] = z, s
        log.warn(guess, "north", lambda idx: [f"grid north taken as that of UTM zone {zz[i]}{'S' if ss[i] else 'N'} "
                                              "(the zone of this position); use --grid-crs for another grid"
                                              for i in idx])
    return conv
