"""Device models, evaluated for many instances at once with numpy.

Each model module offers a *group*: all instances of one device kind, with
their parameters as arrays.  A group gives, at given node voltages, the
current leaving each terminal node into the device and its Jacobian, which the
DC solver stamps, and at the solved point the small-signal values and
capacitances that the linearization uses.
"""
