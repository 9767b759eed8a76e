"""Options shared by the whole test suite."""


def pytest_addoption(parser):
    parser.addoption(
        "--update-golden", action="store_true", default=False,
        help="rewrite the golden report files under tests/report/golden/ from the current output "
             "instead of comparing against them",
    )
