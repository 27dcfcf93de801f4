printf '{"q": 1}\n' > out.json
