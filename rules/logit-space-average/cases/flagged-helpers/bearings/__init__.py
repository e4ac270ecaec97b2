# Pump-bearing fault models and the helpers that draw their MC-dropout samples.
