"""The team's ordinary tests, collected beside the plugin's items."""


def test_ordinary():
    assert 1 + 1 == 2
