package client

import (
	"context"

	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// ServerInfo asks the server for its versions, limits and built-in
// profiles (InfoService.GetServerInfo).
func (c *Client) ServerInfo(ctx context.Context) (*pb.GetServerInfoResponse, error) {
	ctx, cancel := c.callContext(ctx)
	defer cancel()
	resp, err := pb.NewInfoServiceClient(c.conn).GetServerInfo(ctx, &pb.GetServerInfoRequest{})
	if err != nil {
		return nil, wrapError(err)
	}
	return resp, nil
}
