"""The rule sections of the care plan, over a small typed core (``core.Planner``).

``clinic.care.plan.plan_pregnancy`` runs them in order; each section is a function of the
planner that adds items and alerts:

    core        History (entries read once), Planner (facts, items, alerts), time helpers
    rhd         RhD status, items when managed as RhD positive, the pathway
    antibodies  anti-D passive or immune; other red cell antibodies
    doses       reading doses, which item each covers, checks over all doses
    antenatal   booking typing/screen, partner typing, fetal RHD test, routine doses, pre-dose screen
    events      sensitising events: dose, FMH test, repeat doses
    fmh         FMH test done?, more anti-D for a large FMH
    birth       cord typing, postpartum dose and FMH test

The surveillance pathway is ``clinic.care.surveillance``.
"""
