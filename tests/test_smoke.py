from fastapi.testclient import TestClient


def test_health_answers(client: TestClient) -> None:
    assert client.get("/health").json() == {"status": "ok"}
