"""The demo district's marks have unique names (review N-15: two town marks were both "River St & Third Ave").

Names are what people search for and what an import file's ``name`` column carries; a repeated name
makes a search demo or a file confusing. The demo data are invented (fixtures_demo/district.py).
"""

from collections import Counter

from fixtures_demo.district import build_scenario


def test_demo_mark_names_are_unique():
    names = [m.name for m in build_scenario().marks]
    repeated = {name: n for name, n in Counter(names).items() if n > 1}
    assert repeated == {}
    assert len(names) >= 150 and all(names)
