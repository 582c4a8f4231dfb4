"""The science of loading bone: dose, mechanics, bone loads and the loads explained.

Pure, vectorised model functions (a scalar or an array in, the same shape out), each with
its formula and its source.  This package imports nothing above numpy, the records, the
errors and the exercise catalogue.
"""
