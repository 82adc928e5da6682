"""The kernel's data layout: named fields of the model and runs tuples, and the
index table of the tuples and arrays the compiled code builds for itself.

:class:`KernelModel` and :class:`KernelRuns` are named tuples (numba reads
their fields by name, ``model.react_start``); ``compile.py`` fills them.  The
run context, the parameter tuple and the work arrays are made inside compiled
code, where a tuple is indexed by a constant; their indices are named here
(numba folds these module constants at compile time, so a name costs nothing).
"""

from __future__ import annotations

from collections import namedtuple

__all__ = ["KernelModel", "KernelRuns"]

#: A model laid out for the kernel (``compile.compile_model``).  Counts, the
#: per-species charge, CSR-style start offsets (``*_start``, length n + 1) of
#: sites, microstates, interactions, reactants and products; indices into the
#: parameter vector q (``*_q``); reactant kind (0 species, 1 water, 2
#: hydroxide), species, coefficient and site requirement (bit mask and wanted
#: value); reference temperature [K]; substrate mask (amount_factor); index of
#: the medium's pKw in q (-1: water's own).
KernelModel = namedtuple("KernelModel", (
    "n_mol", "n_species", "species_charge", "mol_site_start", "mol_micro_start", "site_pka_q", "site_dh_q",
    "inter_a", "inter_b", "inter_q", "mol_inter_start", "micro_charge", "micro_protons", "step_logk_q",
    "step_ea_q", "react_start", "react_kind", "react_species", "react_coef", "react_mask", "react_value",
    "prod_start", "prod_species", "prod_coef", "t_ref", "substrate_mask", "medium_q"))

#: Runs laid out for the kernel (``compile.compile_runs``), one row per run,
#: padded: pH mode, set point, titrant (ion index, concentration [mol/L]), pH
#: log (times [s], values, count), temperature knots (times [s], values [K],
#: count), start amounts/volume, constant-rate doses (start, end [s], species,
#: amount [mol], volume [L], count), instant events (time, kind 0 add / 1
#: withdraw, species, amount, volume, count), break points (times, count),
#: output times (times, count), absolute error scale of the state, opposite
#: titrant (ion, concentration), controlled flag, start adjustment code
#: (``runs_layout.START_CODES``), start acid and base ions, the smoothed pH
#: log (cubic coefficients per interval of ``log_t``, ``profile_kernel``) and
#: its flag (1: ``log_t``/``log_v``/``log_c`` hold the smoothing spline's
#: breakpoints, values and cubics; 0: the readings, joined by straight lines).
KernelRuns = namedtuple("KernelRuns", (
    "mode", "setpoint", "titrant", "titrant_conc", "log_t", "log_v", "log_n", "temp_t", "temp_v", "temp_n", "y0",
    "feed_t0", "feed_t1", "feed_species", "feed_amount", "feed_volume", "n_feed", "ev_t", "ev_kind", "ev_species",
    "ev_amount", "ev_volume", "n_ev", "bp", "n_bp", "out_t", "n_out", "scale", "second", "second_conc",
    "controlled", "start", "acid", "base", "log_c", "log_smooth"))

# ---- run context ``ctx`` (built by ``integrator_kernel.run_one`` for one run)
CTX_MODE = 0          #: pH mode code (rhs_kernel.MODE_*)
CTX_SETPOINT = 1      #: held pH
CTX_PH_OFFSET = 2     #: shift of held and logged pH
CTX_TITRANT = 3       #: titrant ion index (0 when none)
CTX_TITRANT_CONC = 4  #: titrant concentration [mol/L]
CTX_LOG_T = 5         #: pH log times [s]
CTX_LOG_V = 6         #: pH log values
CTX_LOG_N = 7         #: pH log length (at least 1)
CTX_TEMP_T = 8        #: temperature knot times [s]
CTX_TEMP_V = 9        #: temperature knot values [K]
CTX_TEMP_N = 10       #: number of temperature knots
CTX_SECOND = 11       #: opposite titrant ion index (-1 when none)
CTX_SECOND_CONC = 12  #: opposite titrant concentration [mol/L]
CTX_CONTROLLED = 13   #: 1 when a titrant keeps the charge balance
CTX_LOG_C = 14        #: cubic of each pH log interval (smoothed log), ``profile_kernel.spline_value``
CTX_LOG_SMOOTH = 15   #: 1 when the pH log is smoothed (a spline), 0 when its readings are joined by lines

# ---- parameter tuple ``par`` (values gathered from q for one run)
PAR_PKA = 0           #: pKa of every site at the reference temperature
PAR_ENTHALPY = 1      #: enthalpy of every site [kJ/mol]
PAR_W = 2             #: interaction W of every site pair
PAR_LOG10K = 3        #: log10 k of every step
PAR_EA = 4            #: activation energy of every step [kJ/mol]
PAR_PKW_SHIFT = 5     #: medium pKw minus water's at the reference temperature

# ---- work arrays ``ws`` (``rhs_kernel.make_workspace``)
WS_PKA = 0            #: site pKa at the current temperature
WS_K = 1              #: rate constants at the current temperature
WS_POPS = 2           #: microstate populations
WS_ZBAR = 3           #: mean charge of every molecule
WS_VAR = 4            #: variance of the proton number of every molecule
WS_CONC = 5           #: concentrations [mol/L]
WS_RATE = 6           #: step rates
WS_CACHE = 7          #: scalar cache (entries C_* below)
WS_PKA2 = 8           #: scratch of length n_sites
WS_DZBAR_DT = 9       #: d zbar / dT of every molecule [1/K]
WS_STATE = 10         #: scratch of the state's length
WS_DPH_DY = 11        #: d pH / d y of the free-pH charge balance
WS_SOLVED = 12        #: the state of the free-pH step loop's last charge-balance solve (a step or stage point)

# ---- entries of the scalar cache ``ws[WS_CACHE]``
C_TEMPERATURE = 0     #: temperature of the cached T-dependent values [K]
C_PKW = 1             #: pKw at that temperature
C_PH = 2              #: pH of the cached populations
C_LAST_PH = 3         #: last pH (warm start of the charge balance)
C_DOH_DT = 4          #: d[OH-]/dT at the held pH [mol/L/K]
C_PH_SLOPE = 5        #: d pH/dt of the current segment (logged pH; a smoothed log's at the last time) [1/s]
C_OPPOSITE = 6        #: 1 when the opposite titrant is dosed at the last rhs call
C_STEP_PH = 7         #: pH of ``ws[WS_SOLVED]`` (free pH: the next solve starts at the linear prediction from there;
                      #: NaN: none yet in this segment)
N_CACHE = 8

# info row of one (set, run) task, filled by integrator_kernel.run_one
INFO_FAILED_AT = 0    #: time of a failure [s] (NaN when the run succeeded)
INFO_STEPS = 1        #: accepted steps
INFO_TITRANT = 2      #: titrant added at the start [mol]
INFO_OPPOSITE = 3     #: opposite titrant added at the start [mol]
INFO_START_ADJUST = 4  #: start adjustment inside the start volume [mol] (integrator_kernel.adjust_start)
N_INFO = 5

# ---- start adjustment codes (``KernelRuns.start``; ``integrator_kernel.adjust_start``)
START_COMPUTED = 0    #: acid or base inside the start volume, from the charge balance
START_GIVEN = 1       #: nothing added
START_TITRANT = 2     #: the titrant or the opposite titrant, with its volume
