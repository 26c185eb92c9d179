"""The commented starter spec written by ``partpick init``."""

STARTER_SPEC = """\
# partpick spec: the requirement for one sine oscillator.
# Quantities take SI prefixes (p n u/µ m k M G) and units; resistances and
# capacitances also take the RKM code (4k7, 2n2). Run `partpick spec check FILE`
# to see how partpick reads this file.
name: my-oscillator
description: what this source is for
topology: wien-bridge                            # or quadrature (sine and cosine), or auto (both ranked)

frequency: {target: 1 kHz, tolerance: 1 %}       # held over tolerance, temperature, supply
amplitude: {target: 1 Vrms, tolerance: 10 %}     # at the load; Vpk, Vpp or Vrms
supply: {kind: dual, min: 11.4 V, max: 12.6 V}   # dual: +/- per rail; single: one rail to ground
load: {resistance: 10 kohm, capacitance: 0 F}    # resistance may be 'open'
# load_cosine: {resistance: 10 kohm}             # quadrature: the cosine's load
# quadrature: {phase_error: 0.5 deg, amplitude_match: 1 %}   # quadrature: the outputs' match
temperature: {min: 0 degC, max: 50 degC}         # optional; nominal defaults to 25 degC
distortion: {max_thd: 3 %}                       # THD over harmonics 2..9
yield: {min: 99 %}                               # share of builds meeting every requirement

parts:                                           # family ids from `partpick catalog list`, or all
  resistors: all
  capacitors: all
  opamps: all
  limiters: all

# stock: {file: stock.csv, mode: prefer}         # prefer or only; CSV: family,value,quantity
rank_by: [yield, frequency_error, cost]          # also amplitude_error, thd, startup_margin, parts
results: 10                                      # how many ranked BOMs
builds: 1                                        # boards per order (stock quantities)
output_stage: auto                               # auto, none, follower, gain, attenuator
# catalogs: [../catalogs]                        # folders or files, relative to this spec
"""
