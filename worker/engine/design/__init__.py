"""Design verdicts beside the calculation's: requirements and margins, input uncertainty by
Monte Carlo (JCGM 101:2008), sensitivity indices, design limits and sweeps, and calibration of
inputs to measured data (least squares with profile-likelihood intervals, and Crank's
short-time estimate of a sheet's diffusivity as an independent second figure).

Pure numerics like the rest of the engine: the case document is read by ``schemas``; this
package works on the SI ``Problem`` and on plain arrays.
"""
