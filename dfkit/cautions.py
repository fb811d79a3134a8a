"""The cautions dfkit prints and writes into its outputs, worded once.

Direction finding sends people into the field after transmitters, some of them on
animals: outputs meant for the field carry these lines.
"""

#: One line for the terminal after every result.
CAUTION_LINE = ("caution: dfkit gives estimates, not certainties; not for life-safety search. "
                "Mind licences, permits, private land and local rules; never take bearings while driving.")

#: Short caution carried in files meant for the field (GeoJSON, GPX, maps).
CAUTION = ("dfkit estimates; it is not for life-safety search. Respect licences, permits, private land "
           "and local rules; never take bearings while driving.")

#: Caution carried by every plan of where to take the next bearing (terminal, files, maps).
PLAN_CAUTION = ("Spots are ranked by bearing geometry alone: terrain, reflections, signal strength and access are "
                "ignored. Check the ground and the rules before you go; never plan a route across private land or "
                "take bearings while driving.")
