# Pump-bearing fault models: a small deep ensemble of classifiers.
