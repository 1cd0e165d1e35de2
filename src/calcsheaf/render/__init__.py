"""Writers: HTML, PDF and JSON from the package model; they never compute."""
