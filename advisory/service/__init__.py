"""The live service: the fixed-rate advisory loop, its links and the ``run`` driver."""
