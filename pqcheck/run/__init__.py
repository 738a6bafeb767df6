"""Running checks: everything that turns a request into results.

- :mod:`pqcheck.run.check`: open a capture (with the cache) and analyse it;
- :mod:`pqcheck.run.build`: analyse and assess a capture or every capture of a plan;
- :mod:`pqcheck.run.plan`: test plans (TOML) and the plan template;
- :mod:`pqcheck.run.batch`: many captures against the same limits, in parallel, resumable;
- :mod:`pqcheck.run.verify`: re-run a report and compare it number by number;
- :mod:`pqcheck.run.cache`: the on-disk cache of parsed captures and results.
"""
