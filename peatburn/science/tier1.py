# placeholder replaced by the water-table helper's module
DEFAULT_FUEL_CONSUMPTION_T_HA = 353.0  # IPCC 2013 Wetlands Supplement Ch. 2 Table 2.6 (recalled, unchecked)
