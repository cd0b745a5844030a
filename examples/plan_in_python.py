"""Plan, replan and tabulate from Python: the invented town Tallowmere, three crews, one absent.

Run:  python examples/plan_in_python.py [FOLDER]     (default: a new temporary folder)
"""
import sys
import tempfile

import crewcut

folder = sys.argv[1] if len(sys.argv) > 1 else tempfile.mkdtemp(prefix="crewcut-example-")
town, config = crewcut.write_demo_town(folder, segments=600)        # invented streets and depots
profile = crewcut.load_profile(config)
net = crewcut.read_network(town, profile)
plan = crewcut.plan(net, profile=profile, k=3, depot=(-30.5, 45.2))  # three crews, one yard
crewcut.write_plan(plan, f"{folder}/plan.json")
today = crewcut.replan(plan, crewcut.Changes(absent=("crew-2",)), net, profile=profile)
crewcut.write_plan(today, f"{folder}/today.json")
crewcut.write_text(f"{folder}/today.md", crewcut.table(today, "md"))
print(crewcut.table(today, "md"))
print("violations:", crewcut.verify(today, net, profile) or "none", "| files in", folder)
