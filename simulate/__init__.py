"""The application: model files, engines, estimation, CLI."""
