"""Judgement: how strongly a panel answers a tone, which pairs matter, and what clears them.

``response``   amplification, participation, mount transmissibility, modal overlap (physics)
``screening``  (mode, excitation) pairs graded by the rule set's margins and response thresholds
``verdict``    a panel's assessed range, modal overlap and verdict
``tuning``     modes followed over tension: the tensions each pair blocks, the clear windows

Imports run one way: ``auditor.rules`` (rule sets) → ``response`` → ``screening`` →
``verdict``, ``tuning``; the panel remedy (``auditor.remedy``) builds on them and nothing here
imports it.
"""
