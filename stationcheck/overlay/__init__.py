"""Drawing what the station decided on camera frames: zones, the tool tip, the enable state,
step progress and alarms.

Colours carry IEC 60073 meanings (green normal, yellow abnormal, red fault, blue operator
action required, white neutral) and every coloured mark is doubled by a symbol or words, so
nothing depends on telling colours apart.
"""
