"""Peat dry mass and carbon from burn depth, dry bulk density and carbon fraction.

    M = d * rho_b * A        C = M * f_C

the volume-times-density approach of Page et al. (2002) and Ballhorn et al. (2009), with carbon
density rho_b * f_C as in Warren et al. (2012). Units: d [m], rho_b [g cm-3] (1 g cm-3 =
1000 kg m-3), A [m2], M [kg], f_C [-], C [kg].

References
----------
Page, S. E., Siegert, F., Rieley, J. O., Boehm, H.-D. V., Jaya, A. & Limin, S. (2002). The amount of
carbon released from peat and forest fires in Indonesia during 1997. Nature 420:61-65.
Ballhorn, U., Siegert, F., Mason, M. & Limin, S. (2009). Derivation of burn scar depths and estimation
of carbon emissions with LIDAR in Indonesian peatlands. PNAS 106:21213-21218.
Warren, M. W., Kauffman, J. B., Murdiyarso, D., Anshari, G., Hergoualc'h, K., Kurnianto, S., Purbopuspito,
J., Gusmayanti, E., Afifudin, M., Rahajoe, J., Alhamd, L., Limin, S. & Iswandi, A. (2012). A cost-efficient
method to assess carbon stocks in tropical peat soil. Biogeosciences 9:4477-4485.
"""

from __future__ import annotations

import numpy as np

#: kg m-3 per g cm-3 (exact: 1 g cm-3 = 1000 kg m-3; SI definition).
KG_M3_PER_G_CM3 = 1000.0
#: kg m-2 per t ha-1 (exact: 1000 kg per 10,000 m2; SI definition).
KG_M2_PER_T_HA = 0.1
#: ha per m2 (exact: 1 ha = 10,000 m2).
HA_PER_M2 = 1e-4


def cap_depth(depth, thickness):
    """Burn depth never exceeds the peat that is there: ``min(depth, thickness)`` [m].

    NaN thickness means unknown (no cap).
    """
    d = np.asarray(depth, dtype="float64")
    t = np.asarray(thickness, dtype="float64")
    return np.where(np.isnan(t), d, np.minimum(d, t))


def peat_dry_mass(depth, bulk_density, area):
    """Dry mass of peat burned.

    Parameters
    ----------
    depth : array_like
        Burn depth [m].
    bulk_density : array_like
        Dry bulk density [g cm-3].
    area : array_like
        Area burned [m2].

    Returns
    -------
    numpy.ndarray
        Dry mass [kg] = depth * bulk_density * 1000 * area.

    References
    ----------
    Page et al. (2002), Nature 420:61; Ballhorn et al. (2009), PNAS 106:21213.
    """
    return (np.asarray(depth, dtype="float64") * np.asarray(bulk_density, dtype="float64")
            * KG_M3_PER_G_CM3 * np.asarray(area, dtype="float64"))


def carbon_mass(dry_mass, carbon_fraction):
    """Carbon in a dry mass of peat [kg C] = dry_mass [kg] * carbon_fraction [-]."""
    return np.asarray(dry_mass, dtype="float64") * np.asarray(carbon_fraction, dtype="float64")


def carbon_density(bulk_density, carbon_fraction):
    """Carbon per volume of peat [kg C m-3] = bulk_density [g cm-3] * 1000 * carbon_fraction [-].

    References
    ----------
    Warren et al. (2012), Biogeosciences 9:4477 (carbon density from bulk density and carbon content).
    """
    return np.asarray(bulk_density, dtype="float64") * KG_M3_PER_G_CM3 * np.asarray(carbon_fraction, dtype="float64")


def carbon_per_area(depth, bulk_density, carbon_fraction):
    """Carbon burned per unit area [kg C m-2] = depth [m] * carbon density [kg C m-3]."""
    return np.asarray(depth, dtype="float64") * carbon_density(bulk_density, carbon_fraction)
