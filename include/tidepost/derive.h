/*
 * derive.h - derived values: what a station's readings imply beyond what
 * the packet carries (practical salinity from conductivity, oxygen
 * solubility and saturation, pH from an mCP absorbance ratio, total
 * alkalinity from salinity, the carbonate system and the in-situ pH).
 *
 * Owns: struct tp_derive_cfg (per station, plain data the config loader
 * fills or firmware initialises statically), the binding of its inputs to
 * a layout's value slots (struct tp_derive_plan, made once per station and
 * layout at load time) and the per-reading computation.  The formulas are
 * those of seawater.h, carbonate.h and mcp.h; this module only wires them.
 * No allocation, no I/O, no globals.
 *
 * Callers: the daemon after QC (decode -> QC -> derive), `tidepost
 * decode`, station firmware, the tests.
 *
 * Binding (tp_derive_bind): each input is the first value field (role
 * value, slot order) with the CF standard_name below, or the field named
 * in cfg->field[input] when given.  Units are the loader's canonical
 * spellings; anything else is a binding error:
 *   temperature    sea_water_temperature                      degC
 *   conductivity   sea_water_electrical_conductivity  mS/cm, S/m, uS/cm
 *   salinity       sea_water_practical_salinity               1 or none
 *   pressure       sea_water_pressure                         dbar
 *   depth          depth                                      m
 *   ph             sea_water_ph_reported_on_total_scale       1 or none
 *   oxygen         moles_of_oxygen_per_unit_mass_in_sea_water umol/kg;
 *                  mole_concentration_of_dissolved_molecular_oxygen_in_
 *                  sea_water or mass_concentration_of_oxygen_in_sea_water:
 *                  umol/L, mg/L or mL/L (the unit decides the conversion)
 *   alkalinity     sea_water_alkalinity_expressed_as_mole_equivalent or
 *                  sea_water_alkalinity_per_unit_mass         umol/kg
 *   meas_t         temperature_of_analysis_of_sea_water       degC
 *   mcp_r          (no CF name: by field name only)           1 or none
 * A missing input is no error: the plan simply lacks the values that need
 * it (a housekeeping layout of the same station derives nothing).  It is
 * an error when the configuration asks for it explicitly: a named field
 * that does not exist, alkalinity or measurement temperature "from a
 * field" without one, ph_from_r without an R field, a pressure source
 * that is not there; and when a derived value's name is already a field
 * of the layout, or the values would not fit in TP_MAX_VALUES.
 *
 * What is produced, appended after the layout's slots in this order:
 *   salinity          from conductivity, temperature, pressure; only if
 *                     the layout has no practical salinity.  Pressure:
 *                     cfg->pressure (auto: a pressure field, else a depth
 *                     field, else the station's depth_m, else 0), depth
 *                     converted with tp_p_from_depth at cfg->lat_deg.
 *   oxygen_solubility, oxygen_saturation   when the layout has oxygen,
 *                     salinity (carried or derived) and temperature.
 *   ph                from the mCP ratio when cfg->ph_from_r (at the
 *                     measurement temperature if one is configured, else
 *                     at the in-situ temperature); it replaces any pH
 *                     field of the layout as the carbonate input.
 *   alkalinity        when TA is a constant or linear in salinity
 *                     (a measured TA is already a value of the reading).
 *   ph_insitu, pco2, fco2, dic, carbonate_ion, omega_aragonite,
 *   omega_calcite     when pH, TA, salinity and temperature are there;
 *                     ph_insitu only with a measurement temperature, and
 *                     then the system is evaluated at the in-situ
 *                     temperature (tp_co2_ph_at), else pH is taken as
 *                     in-situ (tp_co2_from_ph_ta).
 * CF names: sea_water_practical_salinity, fractional_saturation_of_oxygen_
 * in_sea_water (with unit %), sea_water_ph_reported_on_total_scale,
 * sea_water_alkalinity_per_unit_mass, partial_pressure_of_carbon_dioxide_
 * in_sea_water, fugacity_of_carbon_dioxide_in_sea_water, moles_of_
 * dissolved_inorganic_carbon_per_unit_mass_in_sea_water (names as used by
 * public CF-tagging code [CODE, secondary]).  None is given for
 * oxygen_solubility (CF's "..._at_saturation" name is per volume),
 * carbonate_ion (CF's mole_concentration_of_carbonate_expressed_as_carbon
 * is per volume, ours per mass) and the saturation states (no CF name
 * known; a proposal was open in cf-convention/discuss#284).
 *
 * Flags of a derived value: null with flag 9 when an input is missing
 * (flag 9 or NaN; pressure included) or the science function returns an
 * error (no solution); otherwise the numerically worst input flag
 * (4 > 3 > 2 > 1: unlike the QC roll-up, an unevaluated input makes the
 * result unevaluated), raised to at least 3 when the function reports an
 * input outside its method's validity range.  Configured constants (TA,
 * measurement temperature, station depth) count as flag 1.
 */
#ifndef TIDEPOST_DERIVE_H
#define TIDEPOST_DERIVE_H

#include <stdbool.h>
#include <stddef.h>

#include "tidepost/carbonate.h"
#include "tidepost/layout.h"
#include "tidepost/mcp.h"
#include "tidepost/seawater.h"
#include "tidepost/status.h"

enum tp_derive_in {
	TP_DIN_TEMPERATURE = 0,
	TP_DIN_CONDUCTIVITY,
	TP_DIN_SALINITY,
	TP_DIN_PRESSURE,
	TP_DIN_DEPTH,
	TP_DIN_PH,
	TP_DIN_OXYGEN,
	TP_DIN_ALKALINITY,
	TP_DIN_MEAS_T,
	TP_DIN_MCP_R,
	TP_DIN_N
};

enum tp_derived {
	TP_DV_SALINITY = 0,
	TP_DV_OXYGEN_SOLUBILITY,
	TP_DV_OXYGEN_SATURATION,
	TP_DV_PH,
	TP_DV_ALKALINITY,
	TP_DV_PH_INSITU,
	TP_DV_PCO2,
	TP_DV_FCO2,
	TP_DV_DIC,
	TP_DV_CARBONATE_ION,
	TP_DV_OMEGA_ARAGONITE,
	TP_DV_OMEGA_CALCITE,
	TP_DV_N
};

enum tp_alk_source {
	TP_ALK_NONE = 0, /* no carbonate values */
	TP_ALK_CONSTANT, /* alk_umol_kg */
	TP_ALK_SALINITY, /* alk_at_zero + alk_per_salinity * S */
	TP_ALK_FIELD     /* a value of the reading */
};

enum tp_meas_t {
	TP_MEAS_T_NONE = 0, /* pH measured at the in-situ temperature */
	TP_MEAS_T_CONSTANT, /* meas_t_c */
	TP_MEAS_T_FIELD     /* a value of the reading */
};

enum tp_pres_source {
	TP_PRES_AUTO = 0,      /* pressure field, depth field, depth_m, 0 */
	TP_PRES_FIELD,         /* a sea_water_pressure field (required) */
	TP_PRES_DEPTH_FIELD,   /* a depth field (required) */
	TP_PRES_STATION_DEPTH, /* depth_m (has_depth required) */
	TP_PRES_ZERO           /* 0 dbar */
};

/* Per station.  A zeroed struct derives salinity and oxygen values only
 * (no alkalinity: no carbonate values). */
struct tp_derive_cfg {
	enum tp_alk_source alk;
	double alk_umol_kg;      /* TP_ALK_CONSTANT, > 0 */
	double alk_at_zero;      /* TP_ALK_SALINITY, umol/kg */
	double alk_per_salinity; /* TP_ALK_SALINITY, umol/kg per S */
	struct tp_co2_opts co2;  /* boron (U74 default), KF (PF87) */
	enum tp_meas_t meas_t;
	double meas_t_c;        /* TP_MEAS_T_CONSTANT, degC ITS-90 */
	bool ph_from_r;         /* pH from field[TP_DIN_MCP_R] */
	enum tp_mcp_method mcp; /* Liu 2011 default, or MR2018 */
	enum tp_pres_source pressure;
	bool has_depth;
	double depth_m;              /* station sensor depth, m */
	double lat_deg;              /* for depth -> pressure; 0 default */
	const char *field[TP_DIN_N]; /* value names; NULL: by CF name */
};

/* One derived value as the plan will append it. */
struct tp_derived_info {
	enum tp_derived what;
	const char *name;          /* e.g. "pco2" */
	const char *unit;          /* canonical spelling, e.g. "uatm" */
	const char *standard_name; /* CF name or NULL */
	int decimals;              /* for printing */
	size_t slot;               /* index in tp_reading.values */
};

struct tp_derive_plan {
	struct tp_derive_cfg cfg; /* copy; names not used after bind */
	size_t n_slots;           /* the layout's value slots */
	int in[TP_DIN_N];         /* bound slot per input, or -1 */
	enum tp_cond_unit cond_unit;
	enum tp_o2_unit o2_unit;
	enum tp_pres_source pressure; /* resolved (never AUTO) */
	struct tp_value station_p;    /* TP_PRES_STATION_DEPTH: the pressure
	                                 at depth_m, worked out once */
	int pos[TP_DV_N];             /* index into out[], or -1 */
	size_t n_out;
	struct tp_derived_info out[TP_DV_N];
};

/* Where a binding problem is. */
struct tp_derive_problem {
	int input;        /* enum tp_derive_in, or -1 */
	const char *name; /* field or derived name, or NULL */
	const char *what; /* static English text */
};

/* The input's key name ("temperature", ..., "mcp_r") or "unknown". */
const char *tp_derive_input_name(enum tp_derive_in in);

/* Static description of a derived value (slot unset: 0). */
const struct tp_derived_info *tp_derived_describe(enum tp_derived d);

/*
 * Bind cfg to layout l and decide which values can be derived.  TP_OK,
 * or TP_ERR_ARG (bad cfg: unknown enum, non-finite or non-positive TA,
 * ...), TP_ERR_LAYOUT (a required input absent, a unit not usable, a
 * derived name clashing with a field) or TP_ERR_SPACE (too many values),
 * with *pb filled (pb may be NULL).  On error the plan derives nothing.
 */
enum tp_status tp_derive_bind(const struct tp_layout *l,
                              const struct tp_derive_cfg *cfg,
                              struct tp_derive_plan *plan,
                              struct tp_derive_problem *pb);

/* The derived value called name in this plan, or NULL. */
const struct tp_derived_info *tp_derive_find(const struct tp_derive_plan *plan,
                                             const char *name);

/*
 * Append the plan's derived values to r (which holds exactly the layout's
 * n_slots values, as tp_decode_record leaves it, QC flags applied).
 * TP_ERR_ARG if r->n_values != plan->n_slots.  Never fails otherwise: a
 * value that cannot be computed is null with flag 9.
 */
enum tp_status tp_derive_apply(const struct tp_derive_plan *plan,
                               struct tp_reading *r);

#endif
