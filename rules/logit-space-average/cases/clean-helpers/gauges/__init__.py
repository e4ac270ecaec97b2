# River-gauge and pump-bearing models with helpers that return stacks which are not logit samples to average.
