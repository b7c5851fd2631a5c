from fastapi.testclient import TestClient


def test_health_answers(client: TestClient) -> None:
    assert client.get("/health").json() == {"status": "ok"}


def test_pages_name_an_icon_that_is_served(client: TestClient) -> None:
    """Found in use: every page asked for /favicon.ico and got 404."""
    page = client.get("/login").text
    assert '<link rel="icon" href="/static/favicon.svg" type="image/svg+xml">' in page
    icon = client.get("/static/favicon.svg")
    assert icon.status_code == 200
    assert icon.headers["content-type"].startswith("image/svg+xml")
    assert icon.text.startswith("<svg")
