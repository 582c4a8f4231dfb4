"""The science of loading bone: dose, mechanics, bone loads, the loads explained and the
one-repetition maximum estimated from a submaximal set.

Pure, vectorised model functions (a scalar or an array in, the same shape out), each with
its formula and its source.  This package imports nothing above numpy, the records, the
errors and the exercise catalogue.
"""
