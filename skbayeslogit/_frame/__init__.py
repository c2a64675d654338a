"""What the ``df.bayeslogit`` accessor and the report share: columns, models, evaluation."""
