module github.com/fadeloop/fadeloop

go 1.26
