"""Reports, revisions and sign-offs arrive with the reporting work; this app may import testing."""
